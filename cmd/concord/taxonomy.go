package main

import (
	"context"
	"errors"
)

func runTaxonomy(ctx context.Context, e *env, args []string) error {
	return errors.New("taxonomy: not built yet")
}
