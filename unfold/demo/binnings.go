package demo

// The truth binning: a central region whose momentum binning differs in
// each rapidity slice (edges by bin) and a rectangular forward region of
// two rapidity slices with one momentum binning, both with
// momentum under- and overflow (the underflow holds the generated zetons
// between ptMin and 20 GeV, which migrate into the measured range). The
// fiducial selection |y| < 2.5 keeps every truth-level zeton inside the
// rapidity edges, so no rapidity flow is needed.
const truthBinningYAML = `# Truth-level binning of the demo (generated zetons, |y| < 2.5).
regions:
  - name: central
    axes:
      - {name: y, edges: [0, 0.8, 1.6]}
      - name: pt
        unit: GeV
        underflow: true
        overflow: true
        edges_by_bin:
          - [20, 25, 30, 40, 50, 65, 85, 110, 160]
          - [20, 25, 30, 40, 55, 75, 100, 140]
  - name: forward
    axes:
      - {name: y, edges: [1.6, 2.0, 2.5]}
      - {name: pt, unit: GeV, underflow: true, overflow: true, edges: [20, 25, 32, 45, 65, 100]}
`

// The reco-level binning: the same regions and rapidity slices, each
// truth momentum bin split in two (finer reco than truth bins makes the
// problem overdetermined, common practice), with the same flows.
const recoBinningYAML = `# Reco-level binning of the demo (reconstructed zeton candidates, |y| < 2.5):
# every truth momentum bin split in two.
regions:
  - name: central
    axes:
      - {name: y, edges: [0, 0.8, 1.6]}
      - name: pt
        unit: GeV
        underflow: true
        overflow: true
        edges_by_bin:
          - [20, 22.5, 25, 27.5, 30, 35, 40, 45, 50, 57.5, 65, 75, 85, 97.5, 110, 135, 160]
          - [20, 22.5, 25, 27.5, 30, 35, 40, 47.5, 55, 65, 75, 87.5, 100, 120, 140]
  - name: forward
    axes:
      - {name: y, edges: [1.6, 2.0, 2.5]}
      - {name: pt, unit: GeV, underflow: true, overflow: true, edges: [20, 22.5, 25, 28.5, 32, 38.5, 45, 55, 65, 82.5, 100]}
`
