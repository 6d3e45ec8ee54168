package response

// Cell is one cell of the migration matrix.
type Cell struct {
	Reco  int     `json:"reco"`
	Truth int     `json:"truth"`
	Value float64 `json:"value"`
}
