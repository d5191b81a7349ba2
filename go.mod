module quietband

go 1.26.0

require (
	go.yaml.in/yaml/v3 v3.0.6
	gonum.org/v1/gonum v0.17.0
)

require (
	github.com/fsnotify/fsnotify v1.10.1 // indirect
	github.com/prometheus/client_golang v1.25.0 // indirect
	github.com/prometheus/exporter-toolkit v0.20.0 // indirect
	golang.org/x/sys v0.50.0 // indirect
)
