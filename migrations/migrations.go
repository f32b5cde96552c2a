// Package migrations holds Concord's schema as numbered golang-migrate SQL
// files, embedded in the binary. Schema changes happen only here, never in
// Go code.
package migrations

import "embed"

// FS holds the NNNN_name.up.sql / NNNN_name.down.sql pairs.
//
//go:embed *.sql
var FS embed.FS
