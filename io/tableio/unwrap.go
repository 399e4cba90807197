package tableio

import "manyfold/io/table"

// Unwrap returns the CSV reader under the file it closes (table.Wrapper),
// so that table.Find reaches its table.InputCounter.
func (c *closeBoth) Unwrap() table.Reader { return c.Reader }
