package binning_test

import (
	"fmt"
	"log"
	"strings"

	"github.com/desmear/desmear/binning"
)

const exampleYAML = `
regions:
  - name: central
    axes:
      - {name: y, edges: [0, 0.5, 1.0, 1.5], overflow: true}
      - name: pt
        unit: GeV
        underflow: true
        overflow: true
        edges_by_bin:
          - [20, 30, 45, 70, 110]
          - [20, 30, 50, 90]
          - [20, 40, 80]
  - name: forward
    axes:
      - {name: y, edges: [1.5, 2.0, 2.5]}
      - {name: pt, unit: GeV, edges: [20, 40, 100]}
`

func ExampleDecode() {
	s, err := binning.Decode(strings.NewReader(exampleYAML), "example.yaml")
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println("axes:", s.AxisNames())
	fmt.Println("bins:", s.Len(), "in range:", s.InRange())
	for r, reg := range s.Regions() {
		lo, hi := s.Span(r)
		flo, fhi := s.FlowSpan(r)
		fmt.Printf("%s: %d in-range bins from %d, %d flow bins from %d\n", reg.Name(), hi-lo, lo, fhi-flo, flo)
	}
	// Output:
	// axes: [y pt]
	// bins: 20 in range: 13
	// central: 9 in-range bins from 0, 7 flow bins from 13
	// forward: 4 in-range bins from 9, 0 flow bins from 20
}

func ExampleDecode_error() {
	_, err := binning.Decode(strings.NewReader(`
regions:
  - name: central
    axes:
      - {name: y, edges: [0, 1, 1, 2]}
`), "bad.yaml")
	fmt.Println(err)
	// Output:
	// bad.yaml:5:33: regions[0].axes[0].edges[2]: edges not strictly increasing: 1 follows 1; list the edges in increasing order without repeats
}

func ExampleScheme_Locate() {
	s, err := binning.Decode(strings.NewReader(exampleYAML), "example.yaml")
	if err != nil {
		log.Fatal(err)
	}
	for _, x := range [][]float64{
		{1.2, 35},  // in range
		{0.5, 30},  // on edges: the bin above
		{0.2, 110}, // the last pt edge of slice 0: overflow
		{1.7, 35},  // forward in range, although central's y overflow covers it
		{3, 35},    // only central's y overflow covers it
		{-1, 35},   // no y underflow anywhere
	} {
		g := s.Locate(x)
		if g == binning.Outside {
			fmt.Println(x, "outside")
			continue
		}
		fmt.Println(x, g, s.Label(g))
	}
	// Output:
	// [1.2 35] 7 central y[1,1.5) pt[20,40)
	// [0.5 30] 5 central y[0.5,1) pt[30,50)
	// [0.2 110] 14 central y[0,0.5) pt[110,inf)
	// [1.7 35] 9 forward y[1.5,2) pt[20,40)
	// [3 35] 19 central y[1.5,inf) pt(any)
	// [-1 35] outside
}

func ExampleScheme_Bin() {
	s, err := binning.Decode(strings.NewReader(exampleYAML), "example.yaml")
	if err != nil {
		log.Fatal(err)
	}
	for _, g := range []int{5, 16, 19} {
		b := s.Bin(g)
		fmt.Println(b.RegionName, b.Flow, b.Axes, b.Index, b.Low, b.High, b.Volume)
	}
	// Output:
	// central false [y pt] [1 1] [0.5 30] [1 50] 10
	// central true [y pt] [1 -2] [0.5 90] [1 +Inf] +Inf
	// central true [y pt] [-2 -3] [1.5 -Inf] [+Inf +Inf] +Inf
}

func ExampleScheme_Neighbours() {
	s, err := binning.Decode(strings.NewReader(exampleYAML), "example.yaml")
	if err != nil {
		log.Fatal(err)
	}
	// Along y, the neighbour in the next rapidity slice is the pt bin that
	// contains this bin's pt centre.
	g := 1 // central y[0,0.5) pt[30,45)
	prev, next := s.Neighbours(g, 0)
	fmt.Println(prev, next, s.Label(next))
	prev, next = s.Neighbours(g, 1)
	fmt.Println(s.Label(prev), "|", s.Label(next))
	// Output:
	// -1 5 central y[0.5,1) pt[30,50)
	// central y[0,0.5) pt[20,30) | central y[0,0.5) pt[45,70)
}

func ExampleScheme_Project() {
	s, err := binning.Decode(strings.NewReader(exampleYAML), "example.yaml")
	if err != nil {
		log.Fatal(err)
	}
	// The y distribution of the central region: sum over pt (axis 1).
	p, err := s.Project(0, 1)
	if err != nil {
		log.Fatal(err)
	}
	counts := make([]float64, s.Len())
	for g := range counts {
		counts[g] = 1
	}
	fmt.Println(p.Map[:9])
	fmt.Println(p.Apply(make([]float64, p.Target.Len()), counts))
	fmt.Println(len(p.Map), p.Target.Len(), p.Target.Label(2))
	// Output:
	// [0 0 0 0 1 1 1 2 2]
	// [4 3 2]
	// 20 3 central y[1,1.5)
}

func ExampleScheme_Slice() {
	s, err := binning.Decode(strings.NewReader(exampleYAML), "example.yaml")
	if err != nil {
		log.Fatal(err)
	}
	// The pt bins of the third rapidity slice of the central region.
	p, err := s.Slice(0, 0, 2)
	if err != nil {
		log.Fatal(err)
	}
	for t := 0; t < p.Target.Len(); t++ {
		fmt.Println(t, p.Target.Label(t))
	}
	fmt.Println(p.Map[7], p.Map[8])
	// Output:
	// 0 central pt[20,40)
	// 1 central pt[40,80)
	// 0 1
}

func ExampleNewRegion() {
	y, _ := binning.NewAxis("y", "", []float64{0, 1, 2}, false, true)
	pt, _ := binning.NewAxisByBin("pt", "GeV", [][]float64{{0, 10, 30}, {0, 30}}, false, false)
	reg, err := binning.NewRegion("central", y, pt)
	if err != nil {
		log.Fatal(err)
	}
	s, err := binning.NewScheme(reg)
	if err != nil {
		log.Fatal(err)
	}
	for g := 0; g < s.Len(); g++ {
		fmt.Println(g, s.Label(g))
	}
	fmt.Println(s.Global(0, 1, 0), s.Global(0, binning.OverflowBin, binning.AnyBin))
	// Output:
	// 0 central y[0,1) pt[0,10)
	// 1 central y[0,1) pt[10,30)
	// 2 central y[1,2) pt[0,30)
	// 3 central y[2,inf) pt(any)
	// 2 3
}
