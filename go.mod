module github.com/lanthorn/lanthorn

go 1.26

require (
	github.com/dave/jennifer v1.7.1
	github.com/stretchr/testify v1.12.1
	github.com/tuneinsight/lattigo/v5 v5.0.7
	gonum.org/v1/gonum v0.17.0
	gopkg.in/yaml.v3 v3.0.1
)
