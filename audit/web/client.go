package web

// The client side of the JSON API, for the command-line clients of a
// node (dwiaudit studies --server, dwiaudit report --server).

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"strings"
	"time"
)

// maxAnswer bounds the body a Client reads: a year of a busy node's
// studies, or a day's list, is tens of MiB at most.
const maxAnswer = 256 << 20

// Client asks a node's JSON API.
type Client struct {
	Server  string        // host:port, or a URL such as http://127.0.0.1:8080
	Token   string        // the bearer token; "" sends none
	Timeout time.Duration // bounds one request; 0 leaves it to ctx
}

// Get GETs the path (its segments joined to Server) with the query q
// and returns the body of a 200 answer; any other answer becomes an
// error with the node's message (ErrorBody).
func (c Client) Get(ctx context.Context, q url.Values, path ...string) ([]byte, error) {
	server := c.Server
	if !strings.Contains(server, "://") {
		server = "http://" + server
	}
	u, err := url.Parse(server)
	if err != nil || u.Host == "" {
		return nil, fmt.Errorf("--server %q is not a URL such as http://127.0.0.1:8080", server)
	}
	u = u.JoinPath(path...)
	u.RawQuery = q.Encode()
	if c.Timeout > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, c.Timeout)
		defer cancel()
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, u.String(), nil)
	if err != nil {
		return nil, err
	}
	req.Header.Set("Accept", "application/json")
	if c.Token != "" {
		req.Header.Set("Authorization", "Bearer "+c.Token)
	}
	res, err := http.DefaultClient.Do(req)
	if err != nil {
		return nil, fmt.Errorf("asking the server: %w", err)
	}
	defer res.Body.Close()
	body, err := io.ReadAll(io.LimitReader(res.Body, maxAnswer))
	if err != nil {
		return nil, fmt.Errorf("reading the server's answer: %w", err)
	}
	if res.StatusCode != http.StatusOK {
		var e ErrorBody
		if json.Unmarshal(body, &e) == nil && e.Error != "" {
			return nil, fmt.Errorf("server answered %s: %s", res.Status, e.Error)
		}
		return nil, fmt.Errorf("server answered %s", res.Status)
	}
	return body, nil
}
