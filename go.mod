module dwiaudit

go 1.26.8

require (
	github.com/gobwas/glob v0.0.0-20170212200151-51eb1ee00b6d // indirect
	github.com/grailbio/go-dicom v0.0.0-20211105193521-b0e216a1c5cd // indirect
	github.com/mitchellh/colorstring v0.0.0-20190213212951-d06e56a500db // indirect
	github.com/rivo/uniseg v0.4.7 // indirect
	github.com/schollz/progressbar/v3 v3.19.1 // indirect
	github.com/suyashkumar/dicom v1.1.0 // indirect
	go.etcd.io/bbolt v1.5.0 // indirect
	go.yaml.in/yaml/v3 v3.0.6 // indirect
	golang.org/x/exp v0.0.0-20240525044651-4c93da0ed11d // indirect
	golang.org/x/sys v0.46.0 // indirect
	golang.org/x/term v0.44.0 // indirect
	golang.org/x/text v0.3.8 // indirect
)
