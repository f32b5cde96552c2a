// Package taxonomy holds a project's label tree: the labels a labeller may
// choose, their stable keys, display names and descriptions, and the
// parent/child relations the agreement engine uses to score near misses.
// It reads and writes a plain-text file a lead can edit by hand, and JSON.
// It does no I/O of its own beyond the reader and writer it is handed (and
// ParseFile), and imports none of Concord's other packages.
//
// # Labels
//
// Every label has a key, which never changes once votes refer to it. A key is
// 1 to MaxKeyLen bytes of lower-case ASCII letters, digits, '-', '_' and '.',
// and starts with a letter or digit. Keys are unique across the whole tree,
// not just among siblings, so a vote can name a label by key alone.
//
// A label's display name defaults to its key. Names and descriptions are
// UTF-8 text without control characters (no tabs, no line breaks) and without
// leading or trailing white space.
//
// Nodes are numbered 0..Len()-1 in pre-order, which is the order of the lines
// in the file. Roots have depth 0 and parent -1.
//
// # Text format
//
// One label per line. A line is
//
//	key
//	key | Display name
//	key | Display name | description
//
// White space around each '|' is ignored. A description needs a display name
// in front of it; write the key again if the name should stay the key. An
// empty display name ("key |") is an error; an empty description is allowed
// and means none.
//
// Inside a display name or description, write "\|" for a literal bar and "\\"
// for a literal backslash. No other backslash escape exists.
//
// Indentation gives the hierarchy. Indent with spaces only (a tab in the
// indentation is an error). The first indented line sets the indentation
// unit; every label line is then indented by a whole number of units, and a
// line is at most one unit deeper than the label line above it. Lines whose
// first non-blank character is '#' are comments; blank lines are ignored.
// A comment must have a line of its own: '#' later in a line is text.
// A UTF-8 byte-order mark at the start of the file and "\r\n" line ends
// are accepted.
//
// Format writes the canonical form: two spaces per level, one space either
// side of each '|', the name only when it differs from the key (or when a
// description follows), no comments and no blank lines. Parsing the output
// of Format gives back an equal Taxonomy, and formatting it again gives the
// same bytes. Comments are not kept; a lead who wants to keep notes in the
// file should put them in descriptions.
//
// An example from a recycling plant's sorting line:
//
//	# Labels for the sorting-line camera.
//	material | Material | anything sorted by what it is made of
//	  plastic | Plastic
//	    pet-bottle | PET bottle | clear or tinted drink bottle, often crushed flat
//	  metal
//	    aluminium-can | Aluminium can | light, thin-walled drink can
//	  paper
//	    cardboard | Cardboard | brown corrugated sheets and boxes
//	  glass
//	residual-waste | Residual waste | nothing any stream takes
//
// # Limits
//
// Limits bounds depth (DefaultMaxDepth levels), size (DefaultMaxNodes labels)
// and line length (DefaultMaxLineLen bytes, measured on the line as written
// and on the line as Format would write it, so every accepted tree can be
// written out and read back). Parsing reports up to DefaultMaxErrors
// problems at once as an ErrorList of *ParseError, each naming its line.
package taxonomy
