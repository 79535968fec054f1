// The part of the WebAssembly JavaScript API the fold kernel uses. Node provides the API at
// run time; TypeScript's ES library leaves it to the DOM library, which a Node tool does not load.
declare namespace WebAssembly {
  interface MemoryDescriptor {
    initial: number;
    maximum?: number;
  }
  class Memory {
    constructor(descriptor: MemoryDescriptor);
    readonly buffer: ArrayBuffer;
    grow(delta: number): number;
  }
  class Module {
    constructor(bytes: BufferSource);
  }
  class Instance {
    constructor(module: Module, imports?: Record<string, Record<string, unknown>>);
    readonly exports: Record<string, unknown>;
  }
}
type BufferSource = ArrayBufferView | ArrayBuffer;
