module quietband

go 1.26

require (
	go.yaml.in/yaml/v3 v3.0.6
	gonum.org/v1/gonum v0.17.0
)
