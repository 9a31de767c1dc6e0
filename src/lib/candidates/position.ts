/**
 * How a candidate's position uncertainty is written: the radius the team stated, in arcseconds,
 * to two significant figures ("± 0.35″", "± 12″"). Pure.
 */

/**
 * The uncertainty as " ± N″" (with a leading space), or '' when none was reported. `unit: ''`
 * leaves the sign off, for a figure that carries it after the uncertainty ("12.3 ± 0.5″").
 */
export function positionErrText(arcsec: number | null | undefined, unit = '″'): string {
	if (arcsec === null || arcsec === undefined || !Number.isFinite(arcsec)) return '';
	return ` ± ${Number(arcsec.toPrecision(2))}${unit}`;
}
