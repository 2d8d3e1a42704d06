package run

import (
	"reflect"
	"testing"

	"winnow/stages/read"
)

// Chunks cuts consecutive files at chunk_bytes: a file larger than the
// limit, or standard input, is a chunk of its own; the cut depends on the
// sizes only (never on a task count), and every file is in exactly one
// chunk, in order.
func TestChunks(t *testing.T) {
	mk := func(sizes ...int64) []read.InputFile {
		var out []read.InputFile
		for i, s := range sizes {
			p := "f"
			if s < 0 {
				p = "-"
			}
			out = append(out, read.InputFile{Path: p, Index: i, Size: s})
		}
		return out
	}
	cases := []struct {
		sizes []int64
		limit int64
		want  [][]int
	}{
		{[]int64{10, 10, 10}, 25, [][]int{{0, 1}, {2}}},
		{[]int64{10, 10, 10}, 30, [][]int{{0, 1, 2}}},
		{[]int64{50, 10, 10}, 25, [][]int{{0}, {1, 2}}},
		{[]int64{10, 50, 10}, 25, [][]int{{0}, {1}, {2}}},
		{[]int64{10, -1, 10}, 100, [][]int{{0}, {1}, {2}}},
		{[]int64{0, 0, 0}, 1, [][]int{{0, 1, 2}}},
		{nil, 10, nil},
	}
	for _, c := range cases {
		in := mk(c.sizes...)
		got := Chunks(in, c.limit)
		if !reflect.DeepEqual(got, c.want) {
			t.Errorf("sizes %v limit %d: %v, want %v", c.sizes, c.limit, got, c.want)
		}
		idx := chunkIndex(in, got)
		for ci, files := range got {
			for _, f := range files {
				if idx[in[f].Index] != ci {
					t.Errorf("chunkIndex of file %d = %d, want %d", f, idx[in[f].Index], ci)
				}
			}
		}
	}
}
