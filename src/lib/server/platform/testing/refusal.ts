/**
 * For specs: the error a promise is refused with, when it is one of `kind`; anything else it
 * throws is thrown on, and a promise that settles fine fails the test.
 */
export async function refusalOf<E extends Error>(p: Promise<unknown>, kind: abstract new (...args: never[]) => E, expected = 'expected a refusal'): Promise<E> {
	try {
		await p;
	} catch (e) {
		if (e instanceof kind) return e;
		throw e;
	}
	throw new Error(expected);
}
