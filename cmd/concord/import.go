package main

import (
	"context"
	"errors"
)

func runImport(ctx context.Context, e *env, args []string) error {
	return errors.New("import: not built yet")
}
