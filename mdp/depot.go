package mdp

// DepotLayout is the demo depot floor used by examples and tests. It is
// invented for this library (no real site): a 15 x 11 floor plan with an
// outer wall, a top aisle, two shelf bays (bay1 top left, bay2 top right)
// and a packing bench in a room between them, a charging pad inside a
// charging lane across the middle of the floor, a loading dock on the east
// side, a start cell on the west side, and a bottom aisle behind two wall
// blocks. 105 free cells.
//
// Codes: 'S' start, 'D' dock, 'C' charger (the charging pad), 'L' lane (the
// charging lane around the pad), 'B' bench, '1' bay1, '2' bay2.
//
// The straight route from the start to the dock (12 moves) crosses five
// lane or charger cells; the route along the top aisle row 4 avoids them
// in 16 moves, and the bottom aisle in 18. So "go to the packing bench",
// "reach the dock but keep off the charging lane" (dock +1, lane and
// charger -1) and "either shelf bay pays 1, the dock 0.5, the charging pad
// costs 0.5" each have a distinct optimal behaviour for gamma around 0.95.
const DepotLayout = `
###############
#.............#
#11.#.....#.22#
#11.#..B..#.22#
#.............#
#....LLLLL....#
#S...LLCLL...D#
#....LLLLL....#
#.####...####.#
#.............#
###############
`

// DepotLabels returns the label codes of DepotLayout: 'D' dock, 'C'
// charger, 'L' lane, 'B' bench, '1' bay1, '2' bay2. The label indices of
// the parsed depot are the sorted names: bay1, bay2, bench, charger, dock,
// lane.
func DepotLabels() map[rune]string {
	return map[rune]string{
		'D': "dock",
		'C': "charger",
		'L': "lane",
		'B': "bench",
		'1': "bay1",
		'2': "bay2",
	}
}

// DepotConfig returns the options Depot uses: DepotLabels, no terminal
// cells, and the Stay action (five actions), so that an agent can remain on
// a place once there. Callers may change the returned struct (e.g. set
// Slip) and pass it to ParseGrid with DepotLayout.
func DepotConfig() *GridConfig {
	return &GridConfig{Labels: DepotLabels(), Stay: true}
}

// DepotTimeLimit is the episode length suggested for sampling the depot
// (a Sampler's maxSteps): long enough to cross the floor several times.
const DepotTimeLimit = 100

// Depot returns the demo depot grid: DepotLayout parsed with
// DepotConfig. Its place cells are not terminal: a reward on a place is
// paid on every step that ends there (PlaceReward), episodes end only by
// truncation at a time limit, and tasks are discounted (gamma around
// 0.95). The single start cell is 'S'.
//
// The depot is invented demo data, not a model of a real site.
func Depot() (*Grid, error) {
	return ParseGrid(DepotLayout, DepotConfig())
}
