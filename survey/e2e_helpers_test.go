package survey

import (
	"path/filepath"
)

// testdataDir is the repository's testdata folder, from this package.
var testdataDir = filepath.Join("..", "testdata")
