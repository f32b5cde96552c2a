package main

import (
	"context"
	"errors"
)

func runLoadtest(ctx context.Context, e *env, args []string) error {
	return errors.New("loadtest: not built yet")
}
