package main

import (
	"context"
	"errors"
)

func runAgree(ctx context.Context, e *env, args []string) error {
	return errors.New("agree: not built yet")
}
