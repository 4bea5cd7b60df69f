/**
 * Types for the parts of @echogarden/pffft-wasm (an Emscripten build, shipped without typings)
 * that realFft.ts uses. Pointers are byte offsets into the module's linear memory.
 */
declare module '@echogarden/pffft-wasm/simd' {
  import type { PffftModule } from '@echogarden/pffft-wasm';
  const factory: () => Promise<PffftModule>;
  export default factory;
}

declare module '@echogarden/pffft-wasm' {
  export interface PffftModule {
    /** View of linear memory; replaced when memory grows, so read it afresh on every use. */
    HEAPF32: Float32Array;
    /** transform: 0 = real, 1 = complex. Returns 0 when the size is not supported. */
    _pffft_new_setup(n: number, transform: number): number;
    _pffft_destroy_setup(setup: number): void;
    /** direction: 0 = forward, 1 = backward. Output is not scaled. */
    _pffft_transform_ordered(setup: number, input: number, output: number, work: number, direction: number): void;
    _pffft_aligned_malloc(bytes: number): number;
    _pffft_aligned_free(ptr: number): void;
    _pffft_simd_size(): number;
  }
  const factory: () => Promise<PffftModule>;
  export default factory;
}
