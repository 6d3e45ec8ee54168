package flagval_test

import (
	"fmt"

	"github.com/desmear/desmear/cmd/desmear/internal/flagval"
)

func ExampleChoice() {
	var mode int
	c := flagval.NewChoice(&mode, 0, []string{"none", "diag", "full"}, []int{0, 1, 2})
	fmt.Println(c.Type(), c.String())
	if err := c.Set("full"); err != nil {
		fmt.Println(err)
	}
	fmt.Println(mode)
	fmt.Println(c.Set("fast") != nil)
	// Output:
	// none|diag|full none
	// 2
	// true
}
