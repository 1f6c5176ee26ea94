package main

// `dwiaudit studies`: what is stored, from the data folder when no server
// holds it, otherwise from the server's HTTP API.

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/url"
	"time"

	"dwiaudit/audit/web"
	"dwiaudit/config"
	"dwiaudit/store"
)

// Limits of `dwiaudit studies`.
const (
	// studiesHTTPTimeout bounds the request to a server: the list is an
	// index read, and a server that takes longer is not answering.
	studiesHTTPTimeout = 30 * time.Second
)

func runStudies(ctx context.Context, env *cliEnv, args []string) int {
	fs := newFlagSet(env, "studies", "[--data DIR | --server URL] [--day YYYY-MM-DD] [--format text|json]")
	data := fs.String("data", "", "read the data folder DIR directly (read-only; default node.data_dir, "+config.DefaultDataDir+")")
	server := fs.String("server", "", "ask a running dwiaudit serve at URL, e.g. http://127.0.0.1:8080")
	configPath := fs.String("config", "", "take the data folder, time zone and HTTP address from this configuration file")
	day := fs.String("day", "", "only studies with an instance received on this day, YYYY-MM-DD in the node's time zone")
	format := fs.String("format", "text", "text or json")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() != 0 {
		fmt.Fprintf(env.stderr, "dwiaudit studies: unexpected argument %q\n", fs.Arg(0))
		fs.Usage()
		return exitUsage
	}
	if *data != "" && *server != "" {
		fmt.Fprintln(env.stderr, "dwiaudit studies: give --data or --server, not both")
		return exitUsage
	}
	if *day != "" {
		if _, err := time.Parse(dayLayout, *day); err != nil {
			fmt.Fprintf(env.stderr, "dwiaudit studies: --day %q is not YYYY-MM-DD\n", *day)
			return exitUsage
		}
	}
	if *format != "text" && *format != "json" {
		fmt.Fprintf(env.stderr, "dwiaudit studies: --format %q: use text or json\n", *format)
		return exitUsage
	}
	cfg := config.Default()
	var err error
	if *configPath != "" {
		if cfg, err = config.LoadFile(*configPath); err != nil {
			fmt.Fprintln(env.stderr, "dwiaudit studies:", err)
			return exitUsage
		}
	}

	var resp web.StudiesResponse
	if *server != "" {
		resp, err = studiesFromServer(ctx, *server, *day)
	} else {
		dir := cfg.Node.DataDir
		if *data != "" {
			dir = *data
		}
		resp, err = studiesFromFolder(dir, *day, cfg)
	}
	if err != nil {
		fmt.Fprintln(env.stderr, "dwiaudit studies:", err)
		return exitFailure
	}
	if *format == "json" {
		enc := json.NewEncoder(env.stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(resp); err != nil {
			return exitFailure
		}
		return exitOK
	}
	printStudies(env.stdout, resp)
	return exitOK
}

// studiesFromFolder opens the data folder read-only. A running server
// holds the index locked; then the answer is to ask it.
func studiesFromFolder(dir, day string, cfg config.Config) (web.StudiesResponse, error) {
	loc, err := config.LoadLocation(cfg.Node.TimeZone)
	if err != nil {
		return web.StudiesResponse{}, fmt.Errorf("node.time_zone: %w", err)
	}
	st, err := store.Open(store.Options{Dir: dir, ReadOnly: true, Location: loc})
	switch {
	case errors.Is(err, store.ErrLocked):
		return web.StudiesResponse{}, fmt.Errorf("a running dwiaudit serve holds the data folder %s; ask it instead: dwiaudit studies --server http://%s", dir, cfg.Node.HTTPListen)
	case errors.Is(err, store.ErrNoIndex):
		return web.StudiesResponse{}, fmt.Errorf("nothing is stored in %s (no index there; is it the data folder?)", dir)
	case err != nil:
		return web.StudiesResponse{}, err
	}
	defer st.Close()
	list, err := st.Studies(day)
	if err != nil {
		return web.StudiesResponse{}, err
	}
	return web.StudiesBody(day, list, loc), nil
}

// studiesFromServer asks GET /api/v1/studies of a running node.
func studiesFromServer(ctx context.Context, server, day string) (web.StudiesResponse, error) {
	tok, err := clientToken()
	if err != nil {
		return web.StudiesResponse{}, err
	}
	q := url.Values{}
	if day != "" {
		q.Set("day", day)
	}
	body, err := web.Client{Server: server, Token: tok, Timeout: studiesHTTPTimeout}.Get(ctx, q, "api", "v1", "studies")
	if err != nil {
		return web.StudiesResponse{}, err
	}
	var out web.StudiesResponse
	if err := json.Unmarshal(body, &out); err != nil {
		return web.StudiesResponse{}, fmt.Errorf("the server's answer is not a study list: %w", err)
	}
	return out, nil
}

// printStudies writes the list for people: a line per study, an indented
// line per series, a total.
func printStudies(w io.Writer, r web.StudiesResponse) {
	const tf = "2006-01-02 15:04:05 MST"
	for _, st := range r.Studies {
		fmt.Fprintf(w, "study %s", st.StudyInstanceUID)
		if st.StudyDate != "" {
			fmt.Fprintf(w, "  date %s %s", dicomDate(st.StudyDate), dicomTime(st.StudyTime))
		}
		if st.AccessionNumber != "" {
			fmt.Fprintf(w, "  accession %s", st.AccessionNumber)
		}
		fmt.Fprintf(w, "  %s, %s, %s\n", plural(len(st.Series), "series", "series"), plural(st.Instances, "instance", "instances"), humanBytes(st.Bytes))
		fmt.Fprintf(w, "  received %s .. %s\n", st.FirstReceived.Format(tf), st.LastReceived.Format(tf))
		for _, se := range st.Series {
			fmt.Fprintf(w, "  series %s  #%d %s", se.SeriesInstanceUID, se.SeriesNumber, se.Modality)
			if se.SeriesDescription != "" {
				fmt.Fprintf(w, " %q", se.SeriesDescription)
			}
			scanner := se.Scanner
			if scanner == "" {
				scanner = "-"
			}
			fmt.Fprintf(w, "  scanner %s (%s)  %s  %s  last received %s\n", scanner, se.CallingAETitle,
				plural(se.Instances, "instance", "instances"), humanBytes(se.Bytes), se.LastReceived.Format(tf))
		}
	}
	what := "stored"
	if r.Day != "" {
		what = "received on " + r.Day
	}
	fmt.Fprintf(w, "%s, %s, %s %s (%s)\n", plural(len(r.Studies), "study", "studies"), plural(r.SeriesCount, "series", "series"),
		plural(r.Instances, "instance", "instances"), what, humanBytes(r.Bytes))
}

func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return fmt.Sprintf("%d %s", n, many)
}

// dicomDate shows a DA value (PS3.5 6.2: YYYYMMDD) as YYYY-MM-DD, or as
// it is when it has another form.
func dicomDate(da string) string {
	if t, err := time.Parse("20060102", da); err == nil {
		return t.Format(dayLayout)
	}
	return da
}

// dicomTime shows a TM value (PS3.5 6.2: HHMMSS.FFFFFF, later parts
// optional) as HH:MM:SS, or as it is.
func dicomTime(tm string) string {
	if len(tm) >= 6 {
		if t, err := time.Parse("150405", tm[:6]); err == nil {
			return t.Format("15:04:05")
		}
	}
	return tm
}
