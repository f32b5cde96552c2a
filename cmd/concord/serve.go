package main

import (
	"context"
	"errors"
)

func runServe(ctx context.Context, e *env, args []string) error {
	return errors.New("serve: not built yet")
}
