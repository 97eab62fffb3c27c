package result

// NearHolds and NoBetter let the tests of package result_test reach the
// certificate's shortcuts.
var (
	NearHolds = nearHolds
	NoBetter  = noBetter
)
