package analysis

import "os"

var readFile = os.ReadFile
