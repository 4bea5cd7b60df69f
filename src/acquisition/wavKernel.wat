;; De-interleaving a WAV file's frames into one channel's float32 samples (wav.ts), in
;; WebAssembly SIMD (128-bit lanes) where the layout allows it.
;; Compiled by `npm run build:kernel` (wabt) into wavKernelWasm.ts; test/wavKernel.test.ts checks
;; that the committed bytes are this text's, and the samples against a plain decoder.
;;
;; Each function reads `frames` samples of one channel, the first at byte `src` and the next
;; `stride` bytes further each, and writes them as float32 from byte `dst` (16-byte aligned).
;; Integer PCM is divided by 2^(bits-1): every 16- and 24-bit value is exact in float32; a 32-bit
;; one is rounded to the nearest float32 (ties to even) before the exact scaling, which is the
;; rounding of the exact quotient, as JavaScript's store into a Float32Array does. A float sample
;; outside [-1e6, 1e6] or not finite becomes NaN (0x7fc00000) and is counted; the function
;; returns that count (0 for integer PCM). Reads may run up to 32 bytes past the last sample's
;; first byte (the caller leaves that much room).
(module
  (memory (export "memory") 1)

  (func $float32 (export "float32")
    (param $src i32) (param $stride i32) (param $frames i32) (param $dst i32) (result i32)
    (local $end i32) (local $v v128) (local $ok v128) (local $good i32) (local $x f32)
    (local $bound v128) (local $nan v128)
    (local.set $bound (f32x4.splat (f32.const 1e6)))
    (local.set $nan (f32x4.splat (f32.const nan)))
    (local.set $end (i32.add (local.get $dst) (i32.shl (local.get $frames) (i32.const 2))))
    ;; One channel: four samples a step straight from the bytes.
    (if (i32.eq (local.get $stride) (i32.const 4))
      (then
        (block $done
          (loop $next
            (br_if $done (i32.gt_u (i32.add (local.get $dst) (i32.const 16)) (local.get $end)))
            (local.set $v (v128.load (local.get $src)))
            (local.set $ok (f32x4.le (f32x4.abs (local.get $v)) (local.get $bound)))
            (v128.store (local.get $dst) (v128.bitselect (local.get $v) (local.get $nan) (local.get $ok)))
            (local.set $good (i32.add (local.get $good) (i32.popcnt (i32x4.bitmask (local.get $ok)))))
            (local.set $src (i32.add (local.get $src) (i32.const 16)))
            (local.set $dst (i32.add (local.get $dst) (i32.const 16)))
            (br $next)))))
    ;; Two channels: four frames a step, this channel's sample of each picked from two loads.
    (if (i32.eq (local.get $stride) (i32.const 8))
      (then
        (block $done
          (loop $next
            (br_if $done (i32.gt_u (i32.add (local.get $dst) (i32.const 16)) (local.get $end)))
            (local.set $v (i8x16.shuffle 0 1 2 3 8 9 10 11 16 17 18 19 24 25 26 27
              (v128.load (local.get $src)) (v128.load offset=16 (local.get $src))))
            (local.set $ok (f32x4.le (f32x4.abs (local.get $v)) (local.get $bound)))
            (v128.store (local.get $dst) (v128.bitselect (local.get $v) (local.get $nan) (local.get $ok)))
            (local.set $good (i32.add (local.get $good) (i32.popcnt (i32x4.bitmask (local.get $ok)))))
            (local.set $src (i32.add (local.get $src) (i32.const 32)))
            (local.set $dst (i32.add (local.get $dst) (i32.const 16)))
            (br $next)))))
    ;; Any other layout, and what is left of the above: one sample a step.
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $dst) (local.get $end)))
        (local.set $x (f32.load (local.get $src)))
        (if (f32.le (f32.abs (local.get $x)) (f32.const 1e6))
          (then
            (f32.store (local.get $dst) (local.get $x))
            (local.set $good (i32.add (local.get $good) (i32.const 1))))
          (else (f32.store (local.get $dst) (f32.const nan))))
        (local.set $src (i32.add (local.get $src) (local.get $stride)))
        (local.set $dst (i32.add (local.get $dst) (i32.const 4)))
        (br $next)))
    (i32.sub (local.get $frames) (local.get $good)))

  (func $pcm16 (export "pcm16")
    (param $src i32) (param $stride i32) (param $frames i32) (param $dst i32) (result i32)
    (local $end i32)
    (local.set $end (i32.add (local.get $dst) (i32.shl (local.get $frames) (i32.const 2))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $dst) (local.get $end)))
        (f32.store (local.get $dst)
          (f32.mul (f32.convert_i32_s (i32.load16_s (local.get $src))) (f32.const 0x1p-15)))
        (local.set $src (i32.add (local.get $src) (local.get $stride)))
        (local.set $dst (i32.add (local.get $dst) (i32.const 4)))
        (br $next)))
    (i32.const 0))

  (func $pcm24 (export "pcm24")
    (param $src i32) (param $stride i32) (param $frames i32) (param $dst i32) (result i32)
    (local $end i32)
    (local.set $end (i32.add (local.get $dst) (i32.shl (local.get $frames) (i32.const 2))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $dst) (local.get $end)))
        ;; Three little-endian bytes, sign-extended from bit 23.
        (f32.store (local.get $dst)
          (f32.mul
            (f32.convert_i32_s (i32.or (i32.load16_u (local.get $src))
              (i32.shl (i32.load8_s offset=2 (local.get $src)) (i32.const 16))))
            (f32.const 0x1p-23)))
        (local.set $src (i32.add (local.get $src) (local.get $stride)))
        (local.set $dst (i32.add (local.get $dst) (i32.const 4)))
        (br $next)))
    (i32.const 0))

  (func $pcm32 (export "pcm32")
    (param $src i32) (param $stride i32) (param $frames i32) (param $dst i32) (result i32)
    (local $end i32)
    (local.set $end (i32.add (local.get $dst) (i32.shl (local.get $frames) (i32.const 2))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $dst) (local.get $end)))
        (f32.store (local.get $dst)
          (f32.mul (f32.convert_i32_s (i32.load (local.get $src))) (f32.const 0x1p-31)))
        (local.set $src (i32.add (local.get $src) (local.get $stride)))
        (local.set $dst (i32.add (local.get $dst) (i32.const 4)))
        (br $next)))
    (i32.const 0))
)
