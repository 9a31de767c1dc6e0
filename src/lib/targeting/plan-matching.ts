/**
 * The largest covered probability on a slot grid, exactly: a maximum vertex-weighted bipartite
 * matching between targets and telescope slots.
 *
 * Covering a target takes one exposure of one of its unconstrained visits (no epoch, or the
 * lowest epoch it asks for) in a slot where that visit is allowed and observable; a slot holds
 * one exposure. The weight sits on the target alone (its probability, whatever the slot), so the
 * sets of targets that can be covered together are the independent sets of a transversal
 * matroid and the greedy rule is optimal (Edmonds 1971; Lawler, "Combinatorial Optimization:
 * Networks and Matroids", 1976, ch. 7-8): take the targets in decreasing probability and keep a
 * target when an augmenting path reaches a free slot. A search that fails leaves every slot it
 * reached matched and closed under the alternating paths; no later path can leave that set, so
 * those slots are never searched again, and the failures cost O(edges) in all.
 *
 * Pure: plain arrays in and out.
 */

export interface MatchingInput {
	slotCount: number;
	/** Per target, its probability. */
	weights: ArrayLike<number>;
	/**
	 * Per target, the slots it may take, in the order to try them (earliest first), and for each
	 * the visit that would be used: `slots[i]` with `visits[i]`.
	 */
	edges: readonly { slots: ArrayLike<number>; visits: ArrayLike<number> }[];
}

export interface MatchingResult {
	/** Per slot, the target placed there or −1. */
	target: Int32Array;
	/** Per slot, the visit placed there or −1. */
	visit: Int32Array;
	/** Sum of the weights of the targets placed. */
	weight: number;
}

export function maxWeightCover(m: MatchingInput): MatchingResult {
	const n = m.edges.length;
	const owner = new Int32Array(m.slotCount).fill(-1);
	const via = new Int32Array(m.slotCount).fill(-1);
	const slotOf = new Int32Array(n).fill(-1);
	const dead = new Uint8Array(m.slotCount);
	const seen = new Int32Array(m.slotCount).fill(-1);
	const reachedBy = new Int32Array(m.slotCount);
	const reachedVia = new Int32Array(m.slotCount);
	const order = Array.from({ length: n }, (_, i) => i).filter((i) => m.weights[i] > 0 && m.edges[i].slots.length > 0);
	order.sort((a, b) => m.weights[b] - m.weights[a] || a - b);
	const queue = new Int32Array(n);
	const touched: number[] = [];
	let weight = 0;
	for (const root of order) {
		let head = 0;
		let tail = 0;
		queue[tail++] = root;
		touched.length = 0;
		let found = -1;
		search: while (head < tail) {
			const u = queue[head++];
			const { slots, visits } = m.edges[u];
			for (let i = 0; i < slots.length; i++) {
				const g = slots[i];
				if (dead[g] || seen[g] === root) continue;
				seen[g] = root;
				reachedBy[g] = u;
				reachedVia[g] = visits[i];
				touched.push(g);
				if (owner[g] < 0) {
					found = g;
					break search;
				}
				queue[tail++] = owner[g];
			}
		}
		if (found < 0) {
			for (const g of touched) dead[g] = 1;
			continue;
		}
		// Shift every target on the path one slot along it.
		for (let g = found; ; ) {
			const u = reachedBy[g];
			const previous = slotOf[u];
			owner[g] = u;
			via[g] = reachedVia[g];
			slotOf[u] = g;
			if (u === root) break;
			g = previous;
		}
		weight += m.weights[root];
	}
	return { target: owner, visit: via, weight };
}
