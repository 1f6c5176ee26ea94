// Package deploy holds what hospital IT installs beside the dwiaudit
// binary, and the tests that keep those files honest:
//
//   - dwiaudit.service (and dwiaudit.service.d/port-104.conf): the
//     systemd unit, hardened; deploy_test.go parses it and runs
//     systemd-analyze verify where systemd is installed;
//   - dwiaudit.example.yaml: every configuration key with its default
//     (checked against cmd/dwiaudit's DefaultConfig there);
//   - prometheus.yml and alerts.yml: the scrape job and the alert rules,
//     with promtool unit tests in alerts_test.yml and
//     alerts_days_test.yml, run by deploy_test.go;
//   - grafana-dashboard.json: the dashboard, whose queries promtool
//     parses in deploy_test.go.
//
// The Go code of the package is only MetricUses: the node metrics the
// alert rules and the dashboard name, read from the embedded files, so
// that a test in cmd/dwiaudit can check a running node exports every one
// of them.
package deploy
