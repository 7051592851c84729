package store

// SetTestHookTempWritten sets the function the atomic writer calls between
// syncing its temporary file and renaming it (nil for none), for the
// crash tests of package store_test.
func SetTestHookTempWritten(f func(tmp string)) { testHookTempWritten = f }
