;; Transient capture's per-sample loops in WebAssembly SIMD: the order products and their
;; windowed sums (orderProducts.ts) and the triangle decimator (triangleDecimator.ts).
;; Compiled by `npm run build:kernel` (wabt) into captureKernelWasm.ts; test/captureKernel.test.ts
;; checks that the committed bytes are this text's, the numbers against the JavaScript twins
;; (turnSinCos.ts, orderProducts.ts and the decimator's loop, bit for bit) and the sine and cosine
;; against an exact evaluation.
;;
;; Its own memory (exported, five pages): for the products, samples x at byte 0, angles
;; (revolutions) at 4096, two cosine/sine scratch pairs at 8192 and 16384 (512 float64 each),
;; and one order's products (re, im interleaved) at 24576; for the decimator, its state at
;; 32768, up to 8192 float32 samples at 65536 and as many outputs' times and values (float64) at
;; 98304 and 163840; for the window sums, the sums at 229376, up to 1024 weights at 229440, four
;; orders' products (1024 interleaved pairs each) from 237632 and as many zeros at 303168 (an
;; order left out of a group of four); the constants of `turns` at 319552.
(module
  (memory (export "memory") 5)

  ;; The constants of `turns` (series coefficients, 4, 0.5, 0.25, 0, 1), read with splat loads.
  (data (i32.const 319552) "\00\00\00\00\00\00\10\40\00\00\00\00\00\00\e0\3f\00\00\00\00\00\00\d0\3f\59\33\f9\2a\c3\ae\ba\3f\f5\d7\f2\c2\62\0c\d2\3f\44\57\15\9f\db\fa\e6\bf\8f\12\4b\f4\24\6e\fb\bf\63\8d\01\4d\43\8f\0e\40\c3\3c\76\a3\38\9d\1f\40\1f\87\e8\fd\74\30\2e\c0\8c\4a\20\2a\1f\6d\3a\c0\82\e7\7e\48\83\07\45\40\bb\ba\91\68\50\1f\4e\40\86\bd\62\ce\2c\2d\53\c0\fa\bf\3c\7e\3c\5d\55\c0\e2\aa\75\67\bc\66\54\40\c4\5a\1b\08\1f\3c\50\40\53\be\25\e6\bc\ab\44\c0\de\45\be\c9\3c\bd\33\c0\07\5c\14\33\26\a6\b1\3c\18\2d\44\54\fb\21\19\40\00\00\00\00\00\00\00\00\00\00\00\00\00\00\f0\3f")

  ;; cos and sin of 2 pi frac(k rev) for `count` angles at `revs`, into `outC` and `outS`, two
  ;; angles at a time (one a lane; an odd count computes one more, into the scratch's next
  ;; slot). The fraction f is reduced to the nearest quarter turn q / 4, exactly (f - q / 4 has
  ;; no rounding: f and q / 4 are within a factor of two), then r = f - q / 4 in [-1/8, 1/8] goes
  ;; into the Taylor series of sin(2 pi r) / r and cos(2 pi r) in r^2, nine terms each; the
  ;; series' first coefficient 2 pi is added as a high and a low part. A NaN angle gives NaN.
  ;; All in f64x2 operations: they write whole registers, where the scalar f64.floor compiles to
  ;; an instruction that waits on its register's last value (and so on the previous angle). The
  ;; constants are splat loads from memory, which took a fifth less time than v128.const.
  (func $turns (export "turns")
    (param $revs i32) (param $count i32) (param $k f64) (param $outC i32) (param $outS i32)
    (local $at i32) (local $end i32) (local $kk v128) (local $t v128) (local $f v128) (local $q v128)
    (local $r v128) (local $r2 v128) (local $ps v128) (local $pc v128) (local $qi v128)
    (local $odd v128) (local $a v128) (local $b v128)
    (local.set $end (i32.shl (local.get $count) (i32.const 3)))
    (local.set $kk (f64x2.splat (local.get $k)))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $at) (local.get $end)))
        (local.set $t (f64x2.mul (local.get $kk) (v128.load (i32.add (local.get $revs) (local.get $at)))))
        (local.set $f (f64x2.sub (local.get $t) (f64x2.floor (local.get $t))))
        (local.set $q (f64x2.floor (f64x2.add (f64x2.mul (local.get $f) (v128.load64_splat offset=319552 (i32.const 0))) (v128.load64_splat offset=319560 (i32.const 0)))))
        (local.set $r (f64x2.sub (local.get $f) (f64x2.mul (local.get $q) (v128.load64_splat offset=319568 (i32.const 0)))))
        (local.set $r2 (f64x2.mul (local.get $r) (local.get $r)))
        ;; (-1)^n (2 pi)^(2n+1) / (2n+1)! and (-1)^n (2 pi)^(2n) / (2n)!, n = 8 down to 0.
        (local.set $ps (v128.load64_splat offset=319576 (i32.const 0)))
        (local.set $pc (v128.load64_splat offset=319584 (i32.const 0)))
        (local.set $ps (f64x2.add (f64x2.mul (local.get $ps) (local.get $r2)) (v128.load64_splat offset=319592 (i32.const 0))))
        (local.set $pc (f64x2.add (f64x2.mul (local.get $pc) (local.get $r2)) (v128.load64_splat offset=319600 (i32.const 0))))
        (local.set $ps (f64x2.add (f64x2.mul (local.get $ps) (local.get $r2)) (v128.load64_splat offset=319608 (i32.const 0))))
        (local.set $pc (f64x2.add (f64x2.mul (local.get $pc) (local.get $r2)) (v128.load64_splat offset=319616 (i32.const 0))))
        (local.set $ps (f64x2.add (f64x2.mul (local.get $ps) (local.get $r2)) (v128.load64_splat offset=319624 (i32.const 0))))
        (local.set $pc (f64x2.add (f64x2.mul (local.get $pc) (local.get $r2)) (v128.load64_splat offset=319632 (i32.const 0))))
        (local.set $ps (f64x2.add (f64x2.mul (local.get $ps) (local.get $r2)) (v128.load64_splat offset=319640 (i32.const 0))))
        (local.set $pc (f64x2.add (f64x2.mul (local.get $pc) (local.get $r2)) (v128.load64_splat offset=319648 (i32.const 0))))
        (local.set $ps (f64x2.add (f64x2.mul (local.get $ps) (local.get $r2)) (v128.load64_splat offset=319656 (i32.const 0))))
        (local.set $pc (f64x2.add (f64x2.mul (local.get $pc) (local.get $r2)) (v128.load64_splat offset=319664 (i32.const 0))))
        (local.set $ps (f64x2.add (f64x2.mul (local.get $ps) (local.get $r2)) (v128.load64_splat offset=319672 (i32.const 0))))
        (local.set $pc (f64x2.add (f64x2.mul (local.get $pc) (local.get $r2)) (v128.load64_splat offset=319680 (i32.const 0))))
        (local.set $ps (f64x2.add (f64x2.mul (local.get $ps) (local.get $r2)) (v128.load64_splat offset=319688 (i32.const 0))))
        (local.set $pc (f64x2.add (f64x2.mul (local.get $pc) (local.get $r2)) (v128.load64_splat offset=319696 (i32.const 0))))
        (local.set $ps (f64x2.add (f64x2.add (f64x2.mul (local.get $ps) (local.get $r2))
          (v128.load64_splat offset=319704 (i32.const 0))) (v128.load64_splat offset=319712 (i32.const 0))))
        (local.set $pc (f64x2.add (f64x2.add (f64x2.mul (local.get $pc) (local.get $r2)) (v128.load64_splat offset=319720 (i32.const 0))) (v128.load64_splat offset=319728 (i32.const 0))))
        (local.set $ps (f64x2.mul (local.get $r) (local.get $ps)))
        ;; Back to the whole angle, q quarter turns ahead of r (q = 4 is a whole turn, NaN counts
        ;; as 0): odd q swaps sine and cosine; the cosine is negative for q = 1, 2, the sine for 2, 3.
        (local.set $qi (i64x2.extend_low_i32x4_s (i32x4.trunc_sat_f64x2_s_zero (local.get $q))))
        (local.set $odd (i64x2.neg (v128.and (local.get $qi) (v128.const i64x2 1 1))))
        (local.set $a (v128.bitselect (local.get $ps) (local.get $pc) (local.get $odd)))
        (local.set $b (v128.bitselect (local.get $pc) (local.get $ps) (local.get $odd)))
        (v128.store (i32.add (local.get $outC) (local.get $at)) (v128.xor (local.get $a)
          (i64x2.shl (v128.and (i64x2.add (local.get $qi) (v128.const i64x2 1 1)) (v128.const i64x2 2 2)) (i32.const 62))))
        (v128.store (i32.add (local.get $outS) (local.get $at)) (v128.xor (local.get $b)
          (i64x2.shl (v128.and (local.get $qi) (v128.const i64x2 2 2)) (i32.const 62))))
        (local.set $at (i32.add (local.get $at) (i32.const 16)))
        (br $next))))

  ;; One order's products of `count` samples at `x`: re = x cos, im = -x sin of the phasor at
  ;; `cos`/`sin` raised to `power` (>= 1) by repeated multiplication, as the JavaScript does;
  ;; written interleaved (re, im) from `out`.
  (func $products (export "products")
    (param $x i32) (param $count i32) (param $cos i32) (param $sin i32) (param $power i32)
    (param $out i32)
    (local $at i32) (local $end i32) (local $c1 f64) (local $s1 f64) (local $c f64) (local $sn f64)
    (local $cn f64) (local $p i32) (local $v f64)
    (local.set $end (i32.shl (local.get $count) (i32.const 3)))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $at) (local.get $end)))
        (local.set $c1 (f64.load (i32.add (local.get $cos) (local.get $at))))
        (local.set $s1 (f64.load (i32.add (local.get $sin) (local.get $at))))
        (local.set $c (local.get $c1))
        (local.set $sn (local.get $s1))
        (local.set $p (i32.const 1))
        (block $powered
          (loop $power
            (br_if $powered (i32.ge_s (local.get $p) (local.get $power)))
            (local.set $cn (f64.sub (f64.mul (local.get $c) (local.get $c1)) (f64.mul (local.get $sn) (local.get $s1))))
            (local.set $sn (f64.add (f64.mul (local.get $sn) (local.get $c1)) (f64.mul (local.get $c) (local.get $s1))))
            (local.set $c (local.get $cn))
            (local.set $p (i32.add (local.get $p) (i32.const 1)))
            (br $power)))
        (local.set $v (f64.load (i32.add (local.get $x) (local.get $at))))
        (f64.store (i32.add (local.get $out) (i32.shl (local.get $at) (i32.const 1))) (f64.mul (local.get $v) (local.get $c)))
        (f64.store offset=8 (i32.add (local.get $out) (i32.shl (local.get $at) (i32.const 1))) (f64.mul (f64.neg (local.get $v)) (local.get $sn)))
        (local.set $at (i32.add (local.get $at) (i32.const 8)))
        (br $next))))

  ;; The triangle decimator's loop over `length` float32 samples at `src` (TriangleDecimator.pushInto,
  ;; number for number): each block of m samples gives its plain sum and its ramp sum, each added
  ;; in sample order as in JavaScript; a completed block after the first gives an output
  ;; (m sum - ramp + previous ramp) norm, stamped at the block's first sample,
  ;; t0S + (first + n) dtS. The state (sum, ramp, previous ramp, block start as f64; fill and
  ;; whether there is a previous block as i32 at 32 and 36) is at `st`. Returns the outputs written.
  ;; Each sample is widened by a vector instruction, which writes its whole register (the scalar
  ;; widening would wait on the register's last value, and so on the previous sample).
  (func $decimate (export "decimate")
    (param $src i32) (param $length i32) (param $first i32) (param $st i32) (param $t0S f64) (param $dtS f64)
    (param $m i32) (param $norm f64) (param $times i32) (param $values i32) (result i32)
    (local $n i32) (local $out i32) (local $stop i32) (local $sum f64) (local $ramp f64)
    (local $prevRamp f64) (local $blockStartS f64) (local $fill i32) (local $fillF f64)
    (local $havePrev i32) (local $x f64)
    (local $i i32) (local $p i32) (local $mb i32) (local $mF f64) (local $s0 f64) (local $s1 f64) (local $s2 f64) (local $s3 f64)
    (local $xA v128) (local $xB v128) (local $sumA v128) (local $sumB v128) (local $rampA v128) (local $rampB v128) (local $fillV v128)
    (local $mb2 i32) (local $mb3 i32)
    (local.set $mb (i32.shl (local.get $m) (i32.const 2)))
    (local.set $mb2 (i32.shl (local.get $mb) (i32.const 1)))
    (local.set $mb3 (i32.add (local.get $mb2) (local.get $mb)))
    (local.set $mF (f64.convert_i32_s (local.get $m)))
    (local.set $sum (f64.load offset=0 (local.get $st)))
    (local.set $ramp (f64.load offset=8 (local.get $st)))
    (local.set $prevRamp (f64.load offset=16 (local.get $st)))
    (local.set $blockStartS (f64.load offset=24 (local.get $st)))
    (local.set $fill (i32.load offset=32 (local.get $st)))
    (local.set $havePrev (i32.load offset=36 (local.get $st)))
    (block $done
      (loop $block
        (br_if $done (i32.ge_s (local.get $n) (local.get $length)))
        ;; Four whole blocks side by side when all their samples are here (most of the time): the
        ;; lanes of two vectors carry blocks b..b+3, each lane's sum and ramp adding its block's
        ;; terms in sample order, as the one-block loop below does (the same numbers); the four
        ;; chains of additions then overlap instead of each waiting on the one before.
        (if (i32.and (i32.eqz (local.get $fill)) (i32.le_s (i32.add (local.get $n) (i32.shl (local.get $m) (i32.const 2))) (local.get $length)))
          (then
            (local.set $sumA (v128.const f64x2 0 0))
            (local.set $sumB (v128.const f64x2 0 0))
            (local.set $rampA (v128.const f64x2 0 0))
            (local.set $rampB (v128.const f64x2 0 0))
            (local.set $fillV (v128.const f64x2 0 0))
            (local.set $p (i32.add (local.get $src) (i32.shl (local.get $n) (i32.const 2))))
            (local.set $i (i32.const 0))
            (block $end4
              (loop $sample4
                (br_if $end4 (i32.ge_s (local.get $i) (local.get $m)))
                (local.set $xA (f64x2.promote_low_f32x4 (f32x4.replace_lane 1
                  (v128.load32_zero (local.get $p))
                  (f32.load (i32.add (local.get $p) (local.get $mb))))))
                (local.set $xB (f64x2.promote_low_f32x4 (f32x4.replace_lane 1
                  (v128.load32_zero (i32.add (local.get $p) (local.get $mb2)))
                  (f32.load (i32.add (local.get $p) (local.get $mb3))))))
                (local.set $rampA (f64x2.add (local.get $rampA) (f64x2.mul (local.get $fillV) (local.get $xA))))
                (local.set $rampB (f64x2.add (local.get $rampB) (f64x2.mul (local.get $fillV) (local.get $xB))))
                (local.set $sumA (f64x2.add (local.get $sumA) (local.get $xA)))
                (local.set $sumB (f64x2.add (local.get $sumB) (local.get $xB)))
                (local.set $fillV (f64x2.add (local.get $fillV) (v128.const f64x2 1 1)))
                (local.set $p (i32.add (local.get $p) (i32.const 4)))
                (local.set $i (i32.add (local.get $i) (i32.const 1)))
                (br $sample4)))
            ;; Each block's output, in order; a block's previous ramp is the block before's.
            (local.set $s0 (f64.add (local.get $t0S) (f64.mul (f64.convert_i32_s (i32.add (local.get $first) (local.get $n))) (local.get $dtS))))
            (local.set $s1 (f64.add (local.get $t0S) (f64.mul (f64.convert_i32_s (i32.add (i32.add (local.get $first) (local.get $n)) (local.get $m))) (local.get $dtS))))
            (local.set $s2 (f64.add (local.get $t0S) (f64.mul (f64.convert_i32_s (i32.add (i32.add (local.get $first) (local.get $n)) (i32.shl (local.get $m) (i32.const 1)))) (local.get $dtS))))
            (local.set $s3 (f64.add (local.get $t0S) (f64.mul (f64.convert_i32_s (i32.add (i32.add (local.get $first) (local.get $n)) (i32.mul (local.get $m) (i32.const 3)))) (local.get $dtS))))
            (if (local.get $havePrev)
              (then (local.set $out (call $emit (local.get $times) (local.get $values) (local.get $out) (local.get $s0)
                (f64x2.extract_lane 0 (local.get $sumA)) (f64x2.extract_lane 0 (local.get $rampA)) (local.get $prevRamp) (local.get $mF) (local.get $norm)))))
            (local.set $out (call $emit (local.get $times) (local.get $values) (local.get $out) (local.get $s1)
              (f64x2.extract_lane 1 (local.get $sumA)) (f64x2.extract_lane 1 (local.get $rampA)) (f64x2.extract_lane 0 (local.get $rampA)) (local.get $mF) (local.get $norm)))
            (local.set $out (call $emit (local.get $times) (local.get $values) (local.get $out) (local.get $s2)
              (f64x2.extract_lane 0 (local.get $sumB)) (f64x2.extract_lane 0 (local.get $rampB)) (f64x2.extract_lane 1 (local.get $rampA)) (local.get $mF) (local.get $norm)))
            (local.set $out (call $emit (local.get $times) (local.get $values) (local.get $out) (local.get $s3)
              (f64x2.extract_lane 1 (local.get $sumB)) (f64x2.extract_lane 1 (local.get $rampB)) (f64x2.extract_lane 0 (local.get $rampB)) (local.get $mF) (local.get $norm)))
            (local.set $prevRamp (f64x2.extract_lane 1 (local.get $rampB)))
            (local.set $havePrev (i32.const 1))
            (local.set $blockStartS (local.get $s3))
            (local.set $n (i32.add (local.get $n) (i32.shl (local.get $m) (i32.const 2))))
            (br $block)))
        (if (i32.eqz (local.get $fill))
          (then (local.set $blockStartS (f64.add (local.get $t0S) (f64.mul (f64.convert_i32_s (i32.add (local.get $first) (local.get $n))) (local.get $dtS))))))
        (local.set $stop (i32.add (local.get $n) (i32.sub (local.get $m) (local.get $fill))))
        (if (i32.gt_s (local.get $stop) (local.get $length)) (then (local.set $stop (local.get $length))))
        (local.set $fillF (f64.convert_i32_s (local.get $fill)))
        (local.set $fill (i32.add (local.get $fill) (i32.sub (local.get $stop) (local.get $n))))
        (block $end
          (loop $sample
            (br_if $end (i32.ge_s (local.get $n) (local.get $stop)))
            (local.set $x (f64x2.extract_lane 0 (f64x2.promote_low_f32x4
              (v128.load32_zero (i32.add (local.get $src) (i32.shl (local.get $n) (i32.const 2)))))))
            (local.set $ramp (f64.add (local.get $ramp) (f64.mul (local.get $fillF) (local.get $x))))
            (local.set $sum (f64.add (local.get $sum) (local.get $x)))
            (local.set $fillF (f64.add (local.get $fillF) (f64.const 1)))
            (local.set $n (i32.add (local.get $n) (i32.const 1)))
            (br $sample)))
        (br_if $done (i32.lt_s (local.get $fill) (local.get $m)))
        (if (local.get $havePrev)
          (then
            (f64.store (i32.add (local.get $times) (i32.shl (local.get $out) (i32.const 3))) (local.get $blockStartS))
            (f64.store (i32.add (local.get $values) (i32.shl (local.get $out) (i32.const 3)))
              (f64.mul (f64.add (f64.sub (f64.mul (f64.convert_i32_s (local.get $m)) (local.get $sum)) (local.get $ramp)) (local.get $prevRamp)) (local.get $norm)))
            (local.set $out (i32.add (local.get $out) (i32.const 1)))))
        (local.set $prevRamp (local.get $ramp))
        (local.set $havePrev (i32.const 1))
        (local.set $sum (f64.const 0))
        (local.set $ramp (f64.const 0))
        (local.set $fill (i32.const 0))
        (br $block)))
    (f64.store offset=0 (local.get $st) (local.get $sum))
    (f64.store offset=8 (local.get $st) (local.get $ramp))
    (f64.store offset=16 (local.get $st) (local.get $prevRamp))
    (f64.store offset=24 (local.get $st) (local.get $blockStartS))
    (i32.store offset=32 (local.get $st) (local.get $fill))
    (i32.store offset=36 (local.get $st) (local.get $havePrev))
    (local.get $out))

  ;; One output of the decimator at `out`: (m sum - ramp + previous ramp) norm, stamped `startS`.
  (func $emit (param $times i32) (param $values i32) (param $out i32) (param $startS f64)
    (param $sum f64) (param $ramp f64) (param $prevRamp f64) (param $mF f64) (param $norm f64) (result i32)
    (f64.store (i32.add (local.get $times) (i32.shl (local.get $out) (i32.const 3))) (local.get $startS))
    (f64.store (i32.add (local.get $values) (i32.shl (local.get $out) (i32.const 3)))
      (f64.mul (f64.add (f64.sub (f64.mul (local.get $mF) (local.get $sum)) (local.get $ramp)) (local.get $prevRamp)) (local.get $norm)))
    (i32.add (local.get $out) (i32.const 1)))

  ;; Part of four orders' windowed sums: over n samples, the weights at `w` times the interleaved
  ;; products (re, im) at p0..p3, added to the sums (re, im of each order, in order) at `acc`.
  ;; Each sum adds its terms in sample order, as one loop per sum would; the two lanes carry an
  ;; order's re and im, the four orders four chains side by side.
  (func $windowSums (export "windowSums")
    (param $w i32) (param $n i32) (param $p0 i32) (param $p1 i32) (param $p2 i32) (param $p3 i32) (param $acc i32)
    (local $i i32) (local $j i32) (local $end i32) (local $wv v128)
    (local $a v128) (local $b v128) (local $c v128) (local $d v128)
    (local.set $a (v128.load offset=0 (local.get $acc)))
    (local.set $b (v128.load offset=16 (local.get $acc)))
    (local.set $c (v128.load offset=32 (local.get $acc)))
    (local.set $d (v128.load offset=48 (local.get $acc)))
    (local.set $end (i32.shl (local.get $n) (i32.const 3)))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $end)))
        (local.set $wv (v128.load64_splat (i32.add (local.get $w) (local.get $i))))
        (local.set $a (f64x2.add (local.get $a) (f64x2.mul (local.get $wv) (v128.load (i32.add (local.get $p0) (local.get $j))))))
        (local.set $b (f64x2.add (local.get $b) (f64x2.mul (local.get $wv) (v128.load (i32.add (local.get $p1) (local.get $j))))))
        (local.set $c (f64x2.add (local.get $c) (f64x2.mul (local.get $wv) (v128.load (i32.add (local.get $p2) (local.get $j))))))
        (local.set $d (f64x2.add (local.get $d) (f64x2.mul (local.get $wv) (v128.load (i32.add (local.get $p3) (local.get $j))))))
        (local.set $i (i32.add (local.get $i) (i32.const 8)))
        (local.set $j (i32.add (local.get $j) (i32.const 16)))
        (br $next)))
    (v128.store offset=0 (local.get $acc) (local.get $a))
    (v128.store offset=16 (local.get $acc) (local.get $b))
    (v128.store offset=32 (local.get $acc) (local.get $c))
    (v128.store offset=48 (local.get $acc) (local.get $d)))
)
