package storage

// SetFailHook makes every commit of w call f first and fail with its error
// (a full disk as far as the Writer can tell). Tests only.
func SetFailHook(w *Writer, f func() error) { w.failHook = f }
