package run

import "winnow/stages/read"

// Chunks cuts the inputs into units of work: runs of consecutive files of
// at most chunkBytes bytes on disk together (a larger file, or standard
// input, is a chunk of its own). It returns, per chunk, the positions in
// inputs of its files. The cut depends on the spec (chunk_bytes) and the
// inputs only, never on how many tasks share the work.
func Chunks(inputs []read.InputFile, chunkBytes int64) [][]int {
	var out [][]int
	var cur []int
	var size int64
	for i, in := range inputs {
		n := max(in.Size, 0)
		if in.Path == "-" || (len(cur) > 0 && size+n > chunkBytes) {
			if len(cur) > 0 {
				out = append(out, cur)
			}
			cur, size = nil, 0
		}
		cur = append(cur, i)
		size += n
		if in.Path == "-" {
			out = append(out, cur)
			cur, size = nil, 0
		}
	}
	if len(cur) > 0 {
		out = append(out, cur)
	}
	return out
}

// chunkIndex maps each input's Index to its chunk number.
func chunkIndex(inputs []read.InputFile, chunks [][]int) []int {
	n := 0
	for _, in := range inputs {
		n = max(n, in.Index+1)
	}
	idx := make([]int, n)
	for c, files := range chunks {
		for _, i := range files {
			idx[inputs[i].Index] = c
		}
	}
	return idx
}
