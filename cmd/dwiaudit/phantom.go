package main

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"text/tabwriter"

	"dwiaudit/audit/phantom"
)

// runPhantom writes a synthetic diffusion study (package audit/phantom):
// for the demo, for tests, and for a site to check its own installation
// end to end with studies whose truth is known.
func runPhantom(_ context.Context, env *cliEnv, args []string) int {
	fs := newFlagSet(env, "phantom", "--out DIR --case NAME [flags]")
	out := fs.String("out", "", "folder to write the study into (created if missing; must be empty)")
	name := fs.String("case", string(phantom.CaseClean), "the case to write; --list shows them")
	matrix := fs.Int("matrix", phantom.DefaultMatrix, fmt.Sprintf("rows and columns of every image (%d..%d)", phantom.MinMatrix, phantom.MaxMatrix))
	slices := fs.Int("slices", phantom.DefaultSlices, fmt.Sprintf("slices (1..%d)", phantom.MaxSlices))
	seed := fs.Int64("seed", 1, "seed of the UIDs and the noise; the same seed writes the same bytes")
	multi := fs.Bool("multiframe", false, "write Enhanced MR Image Storage multi-frame instances instead of one classic MR image per file (--layout enhanced)")
	dirs := fs.Int("directions", phantom.DefaultDirs, fmt.Sprintf("gradient directions per non-zero b-value: 1, 3, 6 or %d", phantom.ManyDirs))
	layout := fs.String("layout", "", "how the diffusion encoding is written: "+layoutNames()+" (default standard; enhanced with --multiframe); --list shows them")
	snr := fs.Float64("snr", 0, "b0 SNR in white matter (0: the case's default, 60, or 4 for low-snr)")
	station := fs.String("station", "", "station name of the invented scanner: "+strings.Join(stations(), ", ")+" (default the first)")
	list := fs.Bool("list", false, "print the cases and the layouts with a description and exit")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if *list {
		tw := tabwriter.NewWriter(env.stdout, 0, 0, 2, ' ', 0)
		for _, c := range phantom.Cases() {
			fmt.Fprintf(tw, "%s\t%s\n", c, c.Description())
		}
		tw.Flush()
		fmt.Fprintln(env.stdout)
		fmt.Fprintln(env.stdout, "layouts (--layout):")
		for _, l := range phantom.Layouts() {
			fmt.Fprintf(tw, "  %s\t%s\n", l, l.Description())
		}
		tw.Flush()
		return exitOK
	}
	if fs.NArg() != 0 || *out == "" {
		fmt.Fprintln(env.stderr, "dwiaudit phantom: want --out DIR and no arguments")
		fs.Usage()
		return exitUsage
	}
	if *layout != "" && !phantom.Layout(*layout).Valid() {
		fmt.Fprintf(env.stderr, "dwiaudit phantom: unknown --layout %q (want one of %s)\n", *layout, layoutNames())
		return exitUsage
	}
	opt := phantom.Options{Case: phantom.Case(*name), Matrix: *matrix, Slices: *slices, Seed: *seed, MultiFrame: *multi, SNR: *snr, Directions: *dirs, Layout: phantom.Layout(*layout)}
	if *station != "" {
		for _, s := range phantom.Scanners() {
			if s.Station == *station {
				opt.Scanner = s
			}
		}
		if opt.Scanner.Station == "" {
			fmt.Fprintf(env.stderr, "dwiaudit phantom: unknown --station %q (want one of %s)\n", *station, strings.Join(stations(), ", "))
			return exitUsage
		}
	}
	st, err := phantom.Write(*out, opt)
	switch {
	case errors.Is(err, phantom.ErrUnknownCase) || errors.Is(err, phantom.ErrUnknownLayout) || errors.Is(err, phantom.ErrInvalidOptions):
		fmt.Fprintln(env.stderr, "dwiaudit phantom:", err)
		return exitUsage
	case err != nil:
		fmt.Fprintln(env.stderr, "dwiaudit phantom:", err)
		return exitFailure
	}
	kind := "classic MR Image Storage"
	if *multi || *layout == string(phantom.LayoutEnhanced) {
		kind = "Enhanced MR Image Storage"
	}
	if *layout != "" {
		kind += ", layout " + *layout
	}
	fmt.Fprintf(env.stdout, "wrote synthetic case %s (%s), %d files in %s\n", opt.Case, kind, len(st.Files), st.Dir)
	for _, s := range st.Series {
		fmt.Fprintf(env.stdout, "  series %d %-4s %-28q %d files, %d images\n", s.Number, s.Role, s.Description, len(s.Files), s.Images)
	}
	for _, d := range st.Truth.Planted {
		fmt.Fprintf(env.stdout, "  planted: %s\n", d.Detail)
	}
	return exitOK
}

// layoutNames is the layouts, comma-separated, for the usage text and
// errors.
func layoutNames() string {
	var names []string
	for _, l := range phantom.Layouts() {
		names = append(names, string(l))
	}
	return strings.Join(names, ", ")
}

func stations() []string {
	var out []string
	for _, s := range phantom.Scanners() {
		out = append(out, s.Station)
	}
	return out
}
