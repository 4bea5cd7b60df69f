// The part of the WebAssembly JavaScript API that spectrumKernel.ts uses (Node has it as a
// global; the project's lib setting, ES2022 without DOM, does not declare it).
declare namespace WebAssembly {
  class Memory {
    constructor(descriptor: { initial: number; maximum?: number });
    readonly buffer: ArrayBuffer;
    grow(delta: number): number;
  }
  class Module {
    constructor(bytes: Uint8Array);
  }
  class Instance {
    constructor(module: Module, imports: Record<string, Record<string, unknown>>);
    readonly exports: Record<string, unknown>;
  }
  function validate(bytes: Uint8Array): boolean;
}
