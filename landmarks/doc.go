// Package landmarks reads and checks the tables that users bring to ferry:
// landmark pairs (a position in the source space, the in vivo side, matched
// to one in the target space, the EM side), cells in source space and
// candidates, such as EM nuclei, in target space. It knows nothing of fitting;
// it hands the fit validated positions in micrometres, and reports every
// fault of the input as an *InputError that names the file, the physical
// line and, where there is one, the column.
//
// # Table format
//
// Every table is CSV with one header row naming the columns. Columns are
// found by name, in any order; header names are trimmed of surrounding spaces
// and matched without regard to case, so "Source_X" is source_x. Lines
// starting with '#' are comments, anywhere in the file, also before the
// header. Blank lines, and lines holding nothing but spaces, are skipped. The
// text must be UTF-8, with or without a byte-order mark; lines may end in LF
// or CRLF. Fields may be quoted in the usual CSV way ("a, b" holds a comma,
// "say ""hi""" a quote); spaces after a comma are ignored, so a quoted field
// may follow ", ". An id that begins with '#' must be quoted, or its line is
// read as a comment.
//
// Landmark pairs need the columns id, kind, source_x, source_y, source_z,
// target_x, target_y and target_z; cells and candidates need id, x, y and z.
// A table without its z columns is 2-D (both source_z and target_z absent for
// pairs; one without the other is an error). kind is vessel, soma or other,
// in any case; an empty kind is other. Ids are unique within a file and not
// empty. Coordinates are decimal numbers ("12.5", "-3", "1e3") and must be
// finite. Columns beyond the required ones are kept, in file order, and
// passed through unchanged but for spaces after the comma: ExtraColumns names
// them and each row's Extra holds its values.
//
// Line numbers in messages count every physical line of the file from 1,
// comments and blank lines included, so that they agree with an editor.
//
// # Units
//
// Coordinates are micrometres unless voxel sizes are given; ScaleVoxels then
// turns voxel indices into micrometres. ParseTriple and ParseIDList read the
// per-axis and id-list flags of the commands.
//
// # Checks for the fit
//
// PairSet gives the fit its positions, ids and kinds as plain slices, and
// Exclude drops the pairs named by --exclude. CheckSpread says in plain words
// when landmarks lie on a line or a plane that a model needs them off.
package landmarks
