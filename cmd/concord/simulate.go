package main

import (
	"context"
	"errors"
)

func runSimulate(ctx context.Context, e *env, args []string) error {
	return errors.New("simulate: not built yet")
}
