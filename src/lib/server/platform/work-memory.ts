/**
 * How typed arrays cross between the server's thread and the work pool's threads without being
 * copied on the server's thread:
 *  - `ownedBytes` + `buffersOf` give a transfer list: the buffer moves to the other thread and
 *    the sender's view becomes empty (input bytes, one-off results such as a raster);
 *  - `shareArrays` puts long-lived data (a parsed sky map, a catalogue's index) in
 *    SharedArrayBuffers once, in the worker, so later tasks that read it post it for free.
 * Imports nothing: the worker entry loads it too.
 */

type TypedArray =
	| Int8Array
	| Uint8Array
	| Uint8ClampedArray
	| Int16Array
	| Uint16Array
	| Int32Array
	| Uint32Array
	| Float32Array
	| Float64Array
	| BigInt64Array
	| BigUint64Array;

type TypedArrayConstructor = new (buffer: ArrayBufferLike, byteOffset?: number, length?: number) => TypedArray;

function isTypedArray(value: unknown): value is TypedArray {
	return ArrayBuffer.isView(value) && !(value instanceof DataView);
}

function isPlainObject(value: unknown): value is Record<string, unknown> {
	if (value === null || typeof value !== 'object') return false;
	const proto = Object.getPrototypeOf(value);
	return proto === Object.prototype || proto === null;
}

/**
 * `bytes` as a view that spans a whole ArrayBuffer of its own, ready to be transferred: the same
 * view when it already does, else a copy of just its bytes (a slice of a larger or shared buffer,
 * such as Node's small-Buffer pool, must not be moved away from its other users).
 */
export function ownedBytes(bytes: Uint8Array): Uint8Array<ArrayBuffer> {
	const b = bytes.buffer;
	if (b instanceof ArrayBuffer && bytes.byteOffset === 0 && bytes.byteLength === b.byteLength) return bytes as Uint8Array<ArrayBuffer>;
	return new Uint8Array(bytes);
}

/**
 * The distinct ArrayBuffers that typed arrays in `value` (plain objects and arrays, walked
 * deeply) span whole: the transfer list that moves them instead of copying. Views of part of a
 * buffer and SharedArrayBuffers are left out (they are copied, resp. shared, by postMessage).
 */
export function buffersOf(value: unknown): ArrayBuffer[] {
	const found = new Set<ArrayBuffer>();
	const walk = (v: unknown): void => {
		if (isTypedArray(v)) {
			const b = v.buffer;
			if (b instanceof ArrayBuffer && v.byteOffset === 0 && v.byteLength === b.byteLength && b.byteLength > 0) found.add(b);
		} else if (Array.isArray(v)) {
			for (const item of v) if (item !== null && typeof item === 'object') walk(item);
		} else if (isPlainObject(v)) {
			for (const key of Object.keys(v)) walk(v[key]);
		}
	};
	walk(value);
	return [...found];
}

/**
 * A copy of `value` whose typed arrays (in plain objects and arrays, walked deeply) live in
 * SharedArrayBuffers; other values are kept as they are. Costs one copy of the arrays, made in
 * the worker that built them.
 */
export function shareArrays<T>(value: T): T {
	const walk = (v: unknown): unknown => {
		if (isTypedArray(v)) {
			if (v.buffer instanceof SharedArrayBuffer) return v;
			const Ctor = v.constructor as TypedArrayConstructor;
			const shared = new Ctor(new SharedArrayBuffer(v.byteLength), 0, v.length);
			(shared as Uint8Array).set(v as Uint8Array);
			return shared;
		}
		if (Array.isArray(v)) {
			if (!v.some((item) => item !== null && typeof item === 'object')) return v;
			return v.map(walk);
		}
		if (isPlainObject(v)) {
			const out: Record<string, unknown> = {};
			for (const key of Object.keys(v)) out[key] = walk(v[key]);
			return out;
		}
		return v;
	};
	return walk(value) as T;
}

/** True when every typed array in `value` lives in a SharedArrayBuffer (tests, and a guard before caching). */
export function isShared(value: unknown): boolean {
	let shared = true;
	const walk = (v: unknown): void => {
		if (isTypedArray(v)) shared &&= v.buffer instanceof SharedArrayBuffer;
		else if (Array.isArray(v)) for (const item of v) walk(item);
		else if (isPlainObject(v)) for (const key of Object.keys(v)) walk(v[key]);
	};
	walk(value);
	return shared;
}
