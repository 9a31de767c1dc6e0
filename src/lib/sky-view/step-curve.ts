/**
 * A step curve (coverage against time) thinned for a chart: at most `max` points, the first and
 * the last kept, and for each of the slices between them the last point in it, i.e. the value the
 * curve has reached by the end of that slice. A curve that only rises (a union of footprints)
 * keeps its shape to within one slice of the x range.
 */
export function thinStepCurve(points: readonly (readonly [number, number])[], max: number): [number, number][] {
	if (points.length <= max) return points.map(([x, y]) => [x, y]);
	const first = points[0];
	const last = points[points.length - 1];
	const inner = Math.max(1, max - 2);
	const sliceX = (last[0] - first[0]) / inner;
	const out: [number, number][] = [[first[0], first[1]]];
	for (let k = 1; k < points.length - 1; k++) {
		const slice = sliceX > 0 ? Math.min(inner - 1, Math.floor((points[k][0] - first[0]) / sliceX)) : 0;
		const nextSlice = sliceX > 0 ? Math.min(inner - 1, Math.floor((points[k + 1][0] - first[0]) / sliceX)) : 0;
		// The last point of its slice (the next point starts another slice or is the curve's end).
		if (slice !== nextSlice || k + 1 === points.length - 1) out.push([points[k][0], points[k][1]]);
	}
	out.push([last[0], last[1]]);
	return out.length <= max ? out : [out[0], ...out.slice(out.length - (max - 1))];
}
