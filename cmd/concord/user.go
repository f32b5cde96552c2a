package main

import (
	"context"
	"errors"
)

func runUser(ctx context.Context, e *env, args []string) error {
	return errors.New("user: not built yet")
}
