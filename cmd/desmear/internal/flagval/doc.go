// Package flagval holds pflag.Value types for the command line: a choice
// among named values and a byte size with units. Set returns an error
// for a value that does not parse, which cobra reports as a usage error;
// nothing here panics on user input.
package flagval
