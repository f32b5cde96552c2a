package main

import (
	"context"
	"errors"
)

func runRelease(ctx context.Context, e *env, args []string) error {
	return errors.New("release: not built yet")
}
