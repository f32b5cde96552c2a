package main

import (
	"context"
	"errors"
)

func runDemo(ctx context.Context, e *env, args []string) error {
	return errors.New("demo: not built yet")
}
