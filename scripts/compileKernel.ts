/** The .wat to .wasm step shared by the build script and the test that checks the committed bytes. */
import wabtInit from 'wabt';

export async function compileKernel(wat: string): Promise<Uint8Array> {
  const wabt = await wabtInit();
  const module = wabt.parseWat('spectrumKernel.wat', wat, { simd: true });
  try {
    module.validate();
    return module.toBinary({ log: false, write_debug_names: true }).buffer;
  } finally {
    module.destroy();
  }
}
