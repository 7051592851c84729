package store

// SetTestHookTempWritten sets the function the atomic writer calls between
// syncing its temporary file and renaming it (nil for none), for the
// crash tests of package store_test.
func SetTestHookTempWritten(f func(tmp string)) { testHookTempWritten = f }

// SetTestHookSummaryRead sets the function called each time a run's
// summary is read from its directory (nil for none), so that the tests of
// the index count what it reads.
func SetTestHookSummaryRead(f func(id string)) { testHookSummaryRead = f }
