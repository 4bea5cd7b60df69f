/**
 * What the WAV reader and writer share: the recording shapes and the RIFF/WAVE constants.
 *
 * Layout (Microsoft/IBM "Multimedia Programming Interface and Data Specifications 1.0", 1991,
 * RIFF chapter; WAVE_FORMAT_EXTENSIBLE from Microsoft's later extension of it):
 *   "RIFF" <u32 size> "WAVE" then chunks <4-char id> <u32 size> <size bytes> [pad byte if odd].
 *   fmt : u16 formatTag, u16 channels, u32 sampleRate, u32 byteRate, u16 blockAlign,
 *         u16 bitsPerSample [, u16 cbSize [, u16 validBits, u32 channelMask, 16-byte GUID]].
 *   data: interleaved frames, little-endian.
 */

export interface RecordingInfo {
  sampleRateHz: number;
  channels: number;
  frames: number;
  /** e.g. 'pcm16', 'pcm24', 'pcm32', 'float32' (with ' extensible' when so wrapped), or 'csv'. */
  format: string;
}

export interface RecordingBlock {
  info: RecordingInfo;
  startFrame: number;
  /** startFrame / sampleRateHz: seconds from the first frame of the recording. */
  t0S: number;
  /**
   * One array per channel, de-interleaved. When the reader was given a selection of channels,
   * the others are empty arrays (they were not decoded).
   */
  channels: Float32Array[];
  /**
   * Samples of the decoded channels that are not usable (not finite, or beyond MAX_SAMPLE_ABS):
   * they are NaN in `channels`, to be treated as missing data.
   */
  unusableSamples: number;
}

export type WavSampleFormat = 'pcm16' | 'pcm24' | 'pcm32' | 'float32';

export const FORMAT_PCM = 0x0001;
export const FORMAT_IEEE_FLOAT = 0x0003;
export const FORMAT_EXTENSIBLE = 0xfffe;
/** Bytes 2..15 of every KSDATAFORMAT_SUBTYPE_* GUID; bytes 0..1 hold the plain format tag. */
export const SUBTYPE_GUID_TAIL = Buffer.from([
  0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71,
]);
export const BYTES_PER_SAMPLE: Record<WavSampleFormat, number> = { pcm16: 2, pcm24: 3, pcm32: 4, float32: 4 };
