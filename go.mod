module strata

go 1.26.8

require (
	codeberg.org/sbinet/npyio v0.14.0
	github.com/BurntSushi/toml v1.6.0
	github.com/zeebo/blake3 v0.2.4
	gonum.org/v1/gonum v0.17.0
)

require (
	github.com/campoy/embedmd v1.0.0 // indirect
	github.com/klauspost/cpuid/v2 v2.0.12 // indirect
	github.com/nlpodyssey/gopickle v0.3.0 // indirect
	github.com/pmezard/go-difflib v1.0.0 // indirect
	golang.org/x/text v0.34.0 // indirect
	golang.org/x/tools v0.41.0 // indirect
)
