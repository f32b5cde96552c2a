package main

import (
	"context"
	"errors"
)

func runProject(ctx context.Context, e *env, args []string) error {
	return errors.New("project: not built yet")
}
