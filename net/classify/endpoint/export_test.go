package endpoint

// SetAcquiredHook makes f run while each classify request holds its
// in-flight place, until the returned function restores the old hook. Set
// it before the server starts and restore it after the server is closed.
func SetAcquiredHook(f func()) (restore func()) {
	old := testHookAcquired
	testHookAcquired = f
	return func() { testHookAcquired = old }
}
