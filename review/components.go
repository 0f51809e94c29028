package review

import "dosecover/dosemap"

// Connectivity is the neighbourhood that joins voxels into one region.
type Connectivity int

// Neighbourhoods: faces only (6) or faces, edges and corners (26).
const (
	Connect6  Connectivity = 6
	Connect26 Connectivity = 26
)

// RegionConnectivity is the neighbourhood with which the analysis groups
// holes and lethal clusters: 26-connectivity, so that a region cut into
// diagonal steps by the voxel grid (an oblique thin gap between two
// sonications, say) is reported as the one region it is rather than as many
// fragments. It errs towards fewer, larger regions.
const RegionConnectivity = Connect26

// Components labels the connected regions of mask on grid g. labels[n] is 0
// outside mask and 1..count inside, numbered in order of their first voxel
// in index order. It uses a breadth-first flood fill.
func Components(g dosemap.Geometry, mask []bool, conn Connectivity) (labels []int32, count int) {
	if len(mask) != g.Len() {
		panic("review: Components: mask length does not match the grid")
	}
	offs := neighbourOffsets(conn)
	labels = make([]int32, len(mask))
	var queue []int
	for seed, m := range mask {
		if !m || labels[seed] != 0 {
			continue
		}
		count++
		lab := int32(count)
		labels[seed] = lab
		queue = append(queue[:0], seed)
		for h := 0; h < len(queue); h++ {
			i, j, k := g.IJK(queue[h])
			for _, o := range offs {
				a, b, c := i+o[0], j+o[1], k+o[2]
				if !g.Contains(a, b, c) {
					continue
				}
				n := g.Index(a, b, c)
				if mask[n] && labels[n] == 0 {
					labels[n] = lab
					queue = append(queue, n)
				}
			}
		}
	}
	return labels, count
}

func neighbourOffsets(conn Connectivity) [][3]int {
	var offs [][3]int
	for dk := -1; dk <= 1; dk++ {
		for dj := -1; dj <= 1; dj++ {
			for di := -1; di <= 1; di++ {
				s := abs(di) + abs(dj) + abs(dk)
				if s == 0 || (conn == Connect6 && s > 1) {
					continue
				}
				offs = append(offs, [3]int{di, dj, dk})
			}
		}
	}
	return offs
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}
