module github.com/desmear/desmear

go 1.26

require (
	github.com/james-bowman/sparse v0.0.0-20260216202247-495ee4f84d35
	github.com/spf13/cobra v1.10.2
	golang.org/x/term v0.44.0
	gonum.org/v1/gonum v0.17.0
)

require (
	github.com/inconshreveable/mousetrap v1.1.0 // indirect
	github.com/spf13/pflag v1.0.9 // indirect
	golang.org/x/exp v0.0.0-20241009180824-f66d83c29e7c // indirect
	golang.org/x/sys v0.46.0 // indirect
)
