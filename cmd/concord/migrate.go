package main

import (
	"context"
	"errors"
)

func runMigrate(ctx context.Context, e *env, args []string) error {
	return errors.New("migrate: not built yet")
}
