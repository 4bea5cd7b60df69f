;; The rolling spectrum's per-frame work around the FFT, the tachless tracker's CIC stage, warped
;; frame and its estimator's running median, in WebAssembly (SIMD, 128-bit lanes, where it helps);
;; the half-band decimation stages are in halfBandKernel.wat, on the same memory.
;; Compiled by `npm run build:kernel` (wabt) into spectrumKernelWasm.ts; test/spectrumKernel.test.ts
;; checks that the committed bytes are this text's.
;;
;; Every function computes exactly what the plain JavaScript in rollingSpectrum.ts,
;; warpedSpectrum.ts, cicDecimator.ts and runningMedian.ts computes, in the same order and the same precision, so records do not depend on which one ran: samples, window and
;; FFT output are float32; the mean, the windowed product, powers, sums and amplitudes are float64
;; (a float32 value promoted to float64 is exact; wasm has no fused multiply-add here, so every
;; product and sum rounds as in JavaScript; f64x2.sqrt is the correctly rounded square root).
;; Pointers are byte offsets into the imported memory; every array starts on a 16-byte boundary.
(module
  (import "env" "memory" (memory 1))

  ;; Mean of frame[0..n) (n a multiple of 4) as four partial sums s0..s3 over i mod 4, returned
  ;; as ((s0 + s1) + s2 + s3) / n; then out[i] = float32((frame[i] - mean) * w[i]). Returns the mean.
  (func $meanWindow (export "meanWindow") (param $frame i32) (param $w i32) (param $out i32) (param $n i32) (result f64)
    (local $i i32) (local $end i32) (local $v v128) (local $s01 v128) (local $s23 v128)
    (local $mean f64) (local $m v128)
    (local.set $end (i32.shl (local.get $n) (i32.const 2)))
    (local.set $s01 (f64x2.splat (f64.const 0)))
    (local.set $s23 (f64x2.splat (f64.const 0)))
    (block $done
      (loop $sum
        (br_if $done (i32.ge_u (local.get $i) (local.get $end)))
        (local.set $v (v128.load (i32.add (local.get $frame) (local.get $i))))
        (local.set $s01 (f64x2.add (local.get $s01) (f64x2.promote_low_f32x4 (local.get $v))))
        (local.set $s23 (f64x2.add (local.get $s23) (f64x2.promote_low_f32x4
          (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $v) (local.get $v)))))
        (local.set $i (i32.add (local.get $i) (i32.const 16)))
        (br $sum)))
    (local.set $mean (f64.div
      (f64.add
        (f64.add
          (f64.add (f64x2.extract_lane 0 (local.get $s01)) (f64x2.extract_lane 1 (local.get $s01)))
          (f64x2.extract_lane 0 (local.get $s23)))
        (f64x2.extract_lane 1 (local.get $s23)))
      (f64.convert_i32_u (local.get $n))))
    (local.set $m (f64x2.splat (local.get $mean)))
    (local.set $i (i32.const 0))
    (block $done2
      (loop $win
        (br_if $done2 (i32.ge_u (local.get $i) (local.get $end)))
        (local.set $v (v128.load (i32.add (local.get $frame) (local.get $i))))
        (local.set $s01 (v128.load (i32.add (local.get $w) (local.get $i))))
        ;; lanes 0,1 then lanes 2,3, each (x - mean) * w in float64, back to float32
        (v128.store (i32.add (local.get $out) (local.get $i))
          (i8x16.shuffle 0 1 2 3 4 5 6 7 16 17 18 19 20 21 22 23
            (f32x4.demote_f64x2_zero
              (f64x2.mul
                (f64x2.sub (f64x2.promote_low_f32x4 (local.get $v)) (local.get $m))
                (f64x2.promote_low_f32x4 (local.get $s01))))
            (f32x4.demote_f64x2_zero
              (f64x2.mul
                (f64x2.sub
                  (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $v) (local.get $v)))
                  (local.get $m))
                (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $s01) (local.get $s01)))))))
        (local.set $i (i32.add (local.get $i) (i32.const 16)))
        (br $win)))
    (local.get $mean))

  ;; Two lines' powers from the ordered real FFT layout at byte offset $at (Re X_k, Im X_k,
  ;; Re X_k+1, Im X_k+1): (re_k^2 + im_k^2, re_k+1^2 + im_k+1^2) in float64.
  (func $pairPower (param $at i32) (result v128)
    (local $v v128) (local $re v128) (local $im v128)
    (local.set $v (v128.load (local.get $at)))
    (local.set $re (f64x2.promote_low_f32x4 (i8x16.shuffle 0 1 2 3 8 9 10 11 0 1 2 3 8 9 10 11 (local.get $v) (local.get $v))))
    (local.set $im (f64x2.promote_low_f32x4 (i8x16.shuffle 4 5 6 7 12 13 14 15 4 5 6 7 12 13 14 15 (local.get $v) (local.get $v))))
    (f64x2.add (f64x2.mul (local.get $re) (local.get $re)) (f64x2.mul (local.get $im) (local.get $im))))

  ;; power[k] = |X_k|^2, k = 0..half, from the ordered layout [X_0, X_half, Re X_1, Im X_1, ...]
  ;; (half a multiple of 2). Line 0's slot pairs X_0 with X_half: X_half is read first and the
  ;; slot's second float zeroed for the pass, so line 0 comes out as X_0^2 exactly.
  (func $power (export "power") (param $ordered i32) (param $power i32) (param $half i32)
    (local $k i32) (local $nyq f64)
    (local.set $nyq (f64.promote_f32 (f32.load offset=4 (local.get $ordered))))
    (f32.store offset=4 (local.get $ordered) (f32.const 0))
    (block $done
      (loop $lines
        (br_if $done (i32.ge_u (local.get $k) (local.get $half)))
        (v128.store
          (i32.add (local.get $power) (i32.shl (local.get $k) (i32.const 3)))
          (call $pairPower (i32.add (local.get $ordered) (i32.shl (local.get $k) (i32.const 3)))))
        (local.set $k (i32.add (local.get $k) (i32.const 2)))
        (br $lines)))
    (f64.store (i32.add (local.get $power) (i32.shl (local.get $half) (i32.const 3)))
      (f64.mul (local.get $nyq) (local.get $nyq))))

  ;; The incremental average fused with the power: for k = 0..half,
  ;;   p = |X_k|^2; q = sum[k] - leaving[k] + p; leaving[k] = p; sum[k] = q;
  ;;   out[k] = sqrt(max(q, 0) * c)   (NaN passes through max)
  ;; then out[0] and out[half] times sqrt(1/2) (no single-sided doubling at DC and Nyquist).
  (func $powerAverage (export "powerAverage") (param $ordered i32) (param $sum i32) (param $leaving i32) (param $out i32)
    (param $c f64) (param $half i32)
    (local $k i32) (local $at i32) (local $nyq f64) (local $p v128) (local $q v128) (local $cv v128)
    (local $zero v128) (local $pn f64) (local $qn f64)
    (local.set $nyq (f64.promote_f32 (f32.load offset=4 (local.get $ordered))))
    (f32.store offset=4 (local.get $ordered) (f32.const 0))
    (local.set $cv (f64x2.splat (local.get $c)))
    (local.set $zero (f64x2.splat (f64.const 0)))
    (block $done
      (loop $lines
        (br_if $done (i32.ge_u (local.get $k) (local.get $half)))
        (local.set $at (i32.shl (local.get $k) (i32.const 3)))
        (local.set $p (call $pairPower (i32.add (local.get $ordered) (local.get $at))))
        (local.set $q (f64x2.add
          (f64x2.sub (v128.load (i32.add (local.get $sum) (local.get $at))) (v128.load (i32.add (local.get $leaving) (local.get $at))))
          (local.get $p)))
        (v128.store (i32.add (local.get $leaving) (local.get $at)) (local.get $p))
        (v128.store (i32.add (local.get $sum) (local.get $at)) (local.get $q))
        (v128.store (i32.add (local.get $out) (local.get $at))
          (f64x2.sqrt (f64x2.mul (f64x2.max (local.get $q) (local.get $zero)) (local.get $cv))))
        (local.set $k (i32.add (local.get $k) (i32.const 2)))
        (br $lines)))
    (local.set $at (i32.shl (local.get $half) (i32.const 3)))
    (local.set $pn (f64.mul (local.get $nyq) (local.get $nyq)))
    (local.set $qn (f64.add
      (f64.sub (f64.load (i32.add (local.get $sum) (local.get $at))) (f64.load (i32.add (local.get $leaving) (local.get $at))))
      (local.get $pn)))
    (f64.store (i32.add (local.get $leaving) (local.get $at)) (local.get $pn))
    (f64.store (i32.add (local.get $sum) (local.get $at)) (local.get $qn))
    (f64.store (i32.add (local.get $out) (local.get $at))
      (f64.mul
        (f64.sqrt (f64.mul (f64.max (local.get $qn) (f64.const 0)) (local.get $c)))
        (f64.const 0x1.6a09e667f3bcdp-1)))
    (f64.store (local.get $out)
      (f64.mul (f64.load (local.get $out)) (f64.const 0x1.6a09e667f3bcdp-1))))

  ;; The warped frame of warpedSpectrum.ts: for i = 0..n-1 (n a multiple of 4), two i per step,
  ;;   u = uStart + (i + 0.5) du;  tau = u if beta = 0, else (sqrt(max(0, 1 + (2 beta) u)) - 1) / beta
  ;;   x = centre + tau rate;  j = floor(x), f = x - j, j clamped to [1, srcLen - 3]
  ;;   v = Catmull-Rom of src[j-1..j+2] at f, in the JavaScript's order of operations;
  ;;   frame[i] = float32(v), sum += v (in order of i),
  ;; then frame[i] = float32((frame[i] - sum / n) * w[i]). All float64 as in JavaScript (src,
  ;; frame and w float32). One 16-byte load brings a lane's four neighbours. x is worked out for
  ;; every i first (into xs, n float64 of scratch), then the interpolation runs over it.
  (func $warp (export "warp") (param $src i32) (param $srcLen i32) (param $frame i32) (param $w i32) (param $n i32)
    (param $centre f64) (param $rate f64) (param $beta f64) (param $uStart f64) (param $du f64) (param $xs i32) (result f64)
    (local $i i32) (local $end i32) (local $iv v128) (local $u v128) (local $tau v128) (local $x v128)
    (local $jf v128) (local $f v128) (local $j v128) (local $a v128) (local $b v128) (local $lo v128) (local $hi v128)
    (local $p0 v128) (local $p1 v128) (local $p2 v128) (local $p3 v128) (local $v v128) (local $sum f64)
    (local $mean f64) (local $m v128) (local $wv v128)
    (local $twoBeta v128) (local $betaV v128) (local $one v128) (local $zero v128) (local $half v128)
    (local $jMin v128) (local $jMax v128) (local $start v128) (local $step v128) (local $centreV v128) (local $rateV v128)
    (local.set $twoBeta (f64x2.splat (f64.mul (f64.const 2) (local.get $beta))))
    (local.set $betaV (f64x2.splat (local.get $beta)))
    (local.set $one (f64x2.splat (f64.const 1)))
    (local.set $zero (f64x2.splat (f64.const 0)))
    (local.set $half (f64x2.splat (f64.const 0.5)))
    (local.set $start (f64x2.splat (local.get $uStart)))
    (local.set $step (f64x2.splat (local.get $du)))
    (local.set $centreV (f64x2.splat (local.get $centre)))
    (local.set $rateV (f64x2.splat (local.get $rate)))
    (local.set $jMin (i32x4.splat (i32.const 1)))
    (local.set $jMax (i32x4.splat (i32.sub (local.get $srcLen) (i32.const 3))))
    (local.set $iv (f64x2.replace_lane 1 (f64x2.splat (f64.const 0.5)) (f64.const 1.5)))
    ;; First pass: where each sample falls in src (x, float64, into xs). Its steps do not depend
    ;; on one another, so the square roots and divisions of many samples are under way at once
    ;; (each step of the interpolation below is a long chain of dependent work of its own).
    (local.set $end (i32.shl (local.get $n) (i32.const 3)))
    (block $doneX
      (loop $positions
        (br_if $doneX (i32.ge_u (local.get $i) (local.get $end)))
        (local.set $u (f64x2.add (local.get $start) (f64x2.mul (local.get $iv) (local.get $step))))
        (if (f64.eq (local.get $beta) (f64.const 0))
          (then (local.set $tau (local.get $u)))
          (else (local.set $tau (f64x2.div
            (f64x2.sub (f64x2.sqrt (f64x2.max (local.get $zero) (f64x2.add (local.get $one) (f64x2.mul (local.get $twoBeta) (local.get $u)))))
              (local.get $one))
            (local.get $betaV)))))
        (v128.store (i32.add (local.get $xs) (local.get $i))
          (f64x2.add (local.get $centreV) (f64x2.mul (local.get $tau) (local.get $rateV))))
        (local.set $iv (f64x2.add (local.get $iv) (f64x2.splat (f64.const 2))))
        (local.set $i (i32.add (local.get $i) (i32.const 16)))
        (br $positions)))
    ;; Second pass: the interpolation at each x, and the sum in order of i.
    (local.set $i (i32.const 0))
    (block $done
      (loop $samples
        (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
        (local.set $x (v128.load (i32.add (local.get $xs) (i32.shl (local.get $i) (i32.const 3)))))
        (local.set $jf (f64x2.floor (local.get $x)))
        (local.set $f (f64x2.sub (local.get $x) (local.get $jf)))
        (local.set $j (i32x4.min_s (i32x4.max_s (i32x4.trunc_sat_f64x2_s_zero (local.get $jf)) (local.get $jMin)) (local.get $jMax)))
        ;; src[j-1..j+2] of each lane: a (lane 0), b (lane 1)
        (local.set $a (v128.load offset=0 (i32.add (local.get $src) (i32.shl (i32.sub (i32x4.extract_lane 0 (local.get $j)) (i32.const 1)) (i32.const 2)))))
        (local.set $b (v128.load offset=0 (i32.add (local.get $src) (i32.shl (i32.sub (i32x4.extract_lane 1 (local.get $j)) (i32.const 1)) (i32.const 2)))))
        (local.set $lo (i8x16.shuffle 0 1 2 3 16 17 18 19 4 5 6 7 20 21 22 23 (local.get $a) (local.get $b)))
        (local.set $hi (i8x16.shuffle 8 9 10 11 24 25 26 27 12 13 14 15 28 29 30 31 (local.get $a) (local.get $b)))
        (local.set $p0 (f64x2.promote_low_f32x4 (local.get $lo)))
        (local.set $p1 (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $lo) (local.get $lo))))
        (local.set $p2 (f64x2.promote_low_f32x4 (local.get $hi)))
        (local.set $p3 (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $hi) (local.get $hi))))
        ;; p1 + (0.5 f) ((p2 - p0) + f (((2 p0 - 5 p1) + 4 p2 - p3) + f ((3 (p1 - p2) + p3) - p0)))
        (local.set $v
          (f64x2.add (local.get $p1)
            (f64x2.mul (f64x2.mul (local.get $half) (local.get $f))
              (f64x2.add (f64x2.sub (local.get $p2) (local.get $p0))
                (f64x2.mul (local.get $f)
                  (f64x2.add
                    (f64x2.sub
                      (f64x2.add
                        (f64x2.sub (f64x2.mul (f64x2.splat (f64.const 2)) (local.get $p0)) (f64x2.mul (f64x2.splat (f64.const 5)) (local.get $p1)))
                        (f64x2.mul (f64x2.splat (f64.const 4)) (local.get $p2)))
                      (local.get $p3))
                    (f64x2.mul (local.get $f)
                      (f64x2.sub
                        (f64x2.add (f64x2.mul (f64x2.splat (f64.const 3)) (f64x2.sub (local.get $p1) (local.get $p2))) (local.get $p3))
                        (local.get $p0)))))))))
        (v128.store64_lane 0 (i32.add (local.get $frame) (i32.shl (local.get $i) (i32.const 2))) (f32x4.demote_f64x2_zero (local.get $v)))
        (local.set $sum (f64.add (f64.add (local.get $sum) (f64x2.extract_lane 0 (local.get $v))) (f64x2.extract_lane 1 (local.get $v))))
        (local.set $i (i32.add (local.get $i) (i32.const 2)))
        (br $samples)))
    (local.set $mean (f64.div (local.get $sum) (f64.convert_i32_u (local.get $n))))
    (local.set $m (f64x2.splat (local.get $mean)))
    (local.set $end (i32.shl (local.get $n) (i32.const 2)))
    (local.set $i (i32.const 0))
    (block $done2
      (loop $win
        (br_if $done2 (i32.ge_u (local.get $i) (local.get $end)))
        (local.set $v (v128.load (i32.add (local.get $frame) (local.get $i))))
        (local.set $wv (v128.load (i32.add (local.get $w) (local.get $i))))
        (v128.store (i32.add (local.get $frame) (local.get $i))
          (i8x16.shuffle 0 1 2 3 4 5 6 7 16 17 18 19 20 21 22 23
            (f32x4.demote_f64x2_zero
              (f64x2.mul
                (f64x2.sub (f64x2.promote_low_f32x4 (local.get $v)) (local.get $m))
                (f64x2.promote_low_f32x4 (local.get $wv))))
            (f32x4.demote_f64x2_zero
              (f64x2.mul
                (f64x2.sub
                  (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $v) (local.get $v)))
                  (local.get $m))
                (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $wv) (local.get $wv)))))))
        (local.set $i (i32.add (local.get $i) (i32.const 16)))
        (br $win)))
    (local.get $mean))

  ;; The tachless estimator's running-median noise floor (runningMedian.ts): out[i] = median of
  ;; a[max(1, i - half) .. min(lastLine, i + half)] for i = from..top (a, out float64 by line),
  ;; the mean of the two middle values (0.5 (lo + hi)) for an even count, exactly what the
  ;; JavaScript gives (a median is a value of the window; no NaN here: the caller checks). The
  ;; window is kept sorted in w (2 half + 3 float64, padded with +inf to an even length); where a
  ;; line enters as one leaves, two lane-wise counts of the window's values below each give both
  ;; places, and only the values between them move by one.
  (func $runningMedian (export "runningMedian") (param $a i32) (param $w i32) (param $out i32) (param $half i32) (param $from i32) (param $top i32) (param $lastLine i32)
    (local $i i32) (local $lo i32) (local $hi i32) (local $n i32) (local $wantLo i32) (local $wantHi i32)
    (local $x f64) (local $v f64) (local $px i32) (local $pv i32) (local $k i32) (local $end i32)
    (local $cx v128) (local $cv v128) (local $wx v128) (local $vx v128) (local $vv v128) (local $p i32)
    ;; lo = hi = max(1, from - half): the window is a[lo..hi)
    (local.set $lo (select (i32.const 1) (i32.sub (local.get $from) (local.get $half)) (i32.lt_s (i32.sub (local.get $from) (local.get $half)) (i32.const 1))))
    (local.set $hi (local.get $lo))
    (f64.store (local.get $w) (f64.const inf))
    (f64.store offset=8 (local.get $w) (f64.const inf))
    (local.set $i (local.get $from))
    (block $done (loop $lines
      (br_if $done (i32.gt_s (local.get $i) (local.get $top)))
      (local.set $wantLo (select (i32.const 1) (i32.sub (local.get $i) (local.get $half)) (i32.lt_s (i32.sub (local.get $i) (local.get $half)) (i32.const 1))))
      (local.set $wantHi (i32.add (select (local.get $lastLine) (i32.add (local.get $i) (local.get $half)) (i32.lt_s (local.get $lastLine) (i32.add (local.get $i) (local.get $half)))) (i32.const 1)))
      ;; one in, one out
      (block $b1 (loop $l1
        (br_if $b1 (i32.or (i32.ge_s (local.get $hi) (local.get $wantHi)) (i32.ge_s (local.get $lo) (local.get $wantLo))))
        (local.set $v (f64.load (i32.add (local.get $a) (i32.shl (local.get $hi) (i32.const 3)))))
        (local.set $x (f64.load (i32.add (local.get $a) (i32.shl (local.get $lo) (i32.const 3)))))
        (local.set $vx (f64x2.splat (local.get $x)))
        (local.set $vv (f64x2.splat (local.get $v)))
        (local.set $cx (v128.const i64x2 0 0))
        (local.set $cv (v128.const i64x2 0 0))
        (local.set $k (i32.const 0))
        (local.set $end (i32.shl (local.get $n) (i32.const 3)))
        (block $b2 (loop $l2
          (br_if $b2 (i32.ge_u (local.get $k) (local.get $end)))
          (local.set $wx (v128.load (i32.add (local.get $w) (local.get $k))))
          (local.set $cx (i64x2.sub (local.get $cx) (f64x2.lt (local.get $wx) (local.get $vx))))
          (local.set $cv (i64x2.sub (local.get $cv) (f64x2.lt (local.get $wx) (local.get $vv))))
          (local.set $k (i32.add (local.get $k) (i32.const 16)))
          (br $l2)))
        (local.set $px (i32.wrap_i64 (i64.add (i64x2.extract_lane 0 (local.get $cx)) (i64x2.extract_lane 1 (local.get $cx)))))
        (local.set $pv (i32.wrap_i64 (i64.add (i64x2.extract_lane 0 (local.get $cv)) (i64x2.extract_lane 1 (local.get $cv)))))
        (if (f64.gt (local.get $v) (local.get $x))
          (then
            ;; w[px .. pv-2] = w[px+1 .. pv-1]; w[pv-1] = v
            (local.set $p (i32.add (local.get $w) (i32.shl (local.get $px) (i32.const 3))))
            (local.set $end (i32.add (local.get $w) (i32.shl (i32.sub (local.get $pv) (i32.const 1)) (i32.const 3))))
            (block $b3 (loop $l3
              (br_if $b3 (i32.ge_u (local.get $p) (local.get $end)))
              (f64.store (local.get $p) (f64.load offset=8 (local.get $p)))
              (local.set $p (i32.add (local.get $p) (i32.const 8)))
              (br $l3)))
            (f64.store (local.get $end) (local.get $v)))
          (else
            ;; w[pv+1 .. px] = w[pv .. px-1]; w[pv] = v
            (local.set $p (i32.add (local.get $w) (i32.shl (local.get $px) (i32.const 3))))
            (local.set $end (i32.add (local.get $w) (i32.shl (local.get $pv) (i32.const 3))))
            (block $b4 (loop $l4
              (br_if $b4 (i32.le_u (local.get $p) (local.get $end)))
              (f64.store (local.get $p) (f64.load offset=0 (i32.sub (local.get $p) (i32.const 8))))
              (local.set $p (i32.sub (local.get $p) (i32.const 8)))
              (br $l4)))
            (f64.store (local.get $end) (local.get $v))))
        (local.set $lo (i32.add (local.get $lo) (i32.const 1)))
        (local.set $hi (i32.add (local.get $hi) (i32.const 1)))
        (br $l1)))
      ;; enters
      (block $b5 (loop $l5
        (br_if $b5 (i32.ge_s (local.get $hi) (local.get $wantHi)))
        (local.set $v (f64.load (i32.add (local.get $a) (i32.shl (local.get $hi) (i32.const 3)))))
        (local.set $vv (f64x2.splat (local.get $v)))
        (local.set $cv (v128.const i64x2 0 0))
        (local.set $k (i32.const 0))
        (local.set $end (i32.shl (local.get $n) (i32.const 3)))
        (block $b6 (loop $l6
          (br_if $b6 (i32.ge_u (local.get $k) (local.get $end)))
          (local.set $cv (i64x2.sub (local.get $cv) (f64x2.lt (v128.load (i32.add (local.get $w) (local.get $k))) (local.get $vv))))
          (local.set $k (i32.add (local.get $k) (i32.const 16)))
          (br $l6)))
        (local.set $pv (i32.wrap_i64 (i64.add (i64x2.extract_lane 0 (local.get $cv)) (i64x2.extract_lane 1 (local.get $cv)))))
        ;; w[pv+1 .. n] = w[pv .. n-1]
        (local.set $p (i32.add (local.get $w) (i32.shl (local.get $n) (i32.const 3))))
        (local.set $end (i32.add (local.get $w) (i32.shl (local.get $pv) (i32.const 3))))
        (block $b7 (loop $l7
          (br_if $b7 (i32.le_u (local.get $p) (local.get $end)))
          (f64.store (local.get $p) (f64.load (i32.sub (local.get $p) (i32.const 8))))
          (local.set $p (i32.sub (local.get $p) (i32.const 8)))
          (br $l7)))
        (f64.store (local.get $end) (local.get $v))
        (local.set $n (i32.add (local.get $n) (i32.const 1)))
        (f64.store (i32.add (local.get $w) (i32.shl (local.get $n) (i32.const 3))) (f64.const inf))
        (f64.store offset=8 (i32.add (local.get $w) (i32.shl (local.get $n) (i32.const 3))) (f64.const inf))
        (local.set $hi (i32.add (local.get $hi) (i32.const 1)))
        (br $l5)))
      ;; leaves
      (block $b8 (loop $l8
        (br_if $b8 (i32.ge_s (local.get $lo) (local.get $wantLo)))
        (local.set $vx (f64x2.splat (f64.load (i32.add (local.get $a) (i32.shl (local.get $lo) (i32.const 3))))))
        (local.set $cx (v128.const i64x2 0 0))
        (local.set $k (i32.const 0))
        (local.set $end (i32.shl (local.get $n) (i32.const 3)))
        (block $b9 (loop $l9
          (br_if $b9 (i32.ge_u (local.get $k) (local.get $end)))
          (local.set $cx (i64x2.sub (local.get $cx) (f64x2.lt (v128.load (i32.add (local.get $w) (local.get $k))) (local.get $vx))))
          (local.set $k (i32.add (local.get $k) (i32.const 16)))
          (br $l9)))
        (local.set $px (i32.wrap_i64 (i64.add (i64x2.extract_lane 0 (local.get $cx)) (i64x2.extract_lane 1 (local.get $cx)))))
        (local.set $n (i32.sub (local.get $n) (i32.const 1)))
        (local.set $p (i32.add (local.get $w) (i32.shl (local.get $px) (i32.const 3))))
        (local.set $end (i32.add (local.get $w) (i32.shl (local.get $n) (i32.const 3))))
        (block $b10 (loop $l10
          (br_if $b10 (i32.ge_u (local.get $p) (local.get $end)))
          (f64.store (local.get $p) (f64.load offset=8 (local.get $p)))
          (local.set $p (i32.add (local.get $p) (i32.const 8)))
          (br $l10)))
        (f64.store (local.get $end) (f64.const inf))
        (f64.store offset=8 (local.get $end) (f64.const inf))
        (local.set $lo (i32.add (local.get $lo) (i32.const 1)))
        (br $l8)))
      ;; median
      (local.set $p (i32.add (local.get $out) (i32.shl (local.get $i) (i32.const 3))))
      (if (i32.and (local.get $n) (i32.const 1))
        (then (f64.store (local.get $p) (f64.load (i32.add (local.get $w) (i32.shl (i32.shr_u (local.get $n) (i32.const 1)) (i32.const 3))))))
        (else (f64.store (local.get $p)
          (f64.mul (f64.const 0.5) (f64.add
            (f64.load (i32.add (local.get $w) (i32.shl (i32.sub (i32.shr_u (local.get $n) (i32.const 1)) (i32.const 1)) (i32.const 3))))
            (f64.load (i32.add (local.get $w) (i32.shl (i32.shr_u (local.get $n) (i32.const 1)) (i32.const 3)))))))))
      (local.set $i (i32.add (local.get $i) (i32.const 1)))
      (br $lines)))
  )

  ;; The tachless tracker's CIC stage (cicDecimator.ts): out[m] = float32(sum over j = 0..n-1, in
  ;; order, of taps[j] src[i + j]) for the window starts i = first, first + r, ... below count
  ;; (src float32: the stage's history, then the block; taps float64; sums float64 as in the
  ;; JavaScript). Eight outputs at a time, each its own sum. Returns the outputs written.
  (func $cic (export "cic") (param $src i32) (param $first i32) (param $count i32) (param $out i32) (param $taps i32) (param $n i32) (param $r i32) (result i32)
    (local $i i32) (local $m i32) (local $j i32) (local $p i32) (local $t f64) (local $rb i32)
    (local $a0 f64) (local $a1 f64) (local $a2 f64) (local $a3 f64) (local $a4 f64) (local $a5 f64) (local $a6 f64) (local $a7 f64)
    (local.set $rb (i32.shl (local.get $r) (i32.const 2)))
    (local.set $i (local.get $first))
    (block $done8 (loop $eight
      (br_if $done8 (i32.ge_s (i32.add (local.get $i) (i32.mul (local.get $r) (i32.const 7))) (local.get $count)))
      (local.set $a0 (f64.const 0)) (local.set $a1 (f64.const 0)) (local.set $a2 (f64.const 0)) (local.set $a3 (f64.const 0))
      (local.set $a4 (f64.const 0)) (local.set $a5 (f64.const 0)) (local.set $a6 (f64.const 0)) (local.set $a7 (f64.const 0))
      (local.set $p (i32.add (local.get $src) (i32.shl (local.get $i) (i32.const 2))))
      (local.set $j (i32.const 0))
      (block $doneTaps (loop $taps8
        (br_if $doneTaps (i32.ge_s (local.get $j) (local.get $n)))
        (local.set $t (f64.load (i32.add (local.get $taps) (i32.shl (local.get $j) (i32.const 3)))))
        (local.set $a0 (f64.add (local.get $a0) (f64.mul (local.get $t) (f64.promote_f32 (f32.load (local.get $p))))))
        (local.set $a1 (f64.add (local.get $a1) (f64.mul (local.get $t) (f64.promote_f32 (f32.load (i32.add (local.get $p) (local.get $rb)))))))
        (local.set $a2 (f64.add (local.get $a2) (f64.mul (local.get $t) (f64.promote_f32 (f32.load (i32.add (local.get $p) (i32.mul (local.get $rb) (i32.const 2))))))))
        (local.set $a3 (f64.add (local.get $a3) (f64.mul (local.get $t) (f64.promote_f32 (f32.load (i32.add (local.get $p) (i32.mul (local.get $rb) (i32.const 3))))))))
        (local.set $a4 (f64.add (local.get $a4) (f64.mul (local.get $t) (f64.promote_f32 (f32.load (i32.add (local.get $p) (i32.mul (local.get $rb) (i32.const 4))))))))
        (local.set $a5 (f64.add (local.get $a5) (f64.mul (local.get $t) (f64.promote_f32 (f32.load (i32.add (local.get $p) (i32.mul (local.get $rb) (i32.const 5))))))))
        (local.set $a6 (f64.add (local.get $a6) (f64.mul (local.get $t) (f64.promote_f32 (f32.load (i32.add (local.get $p) (i32.mul (local.get $rb) (i32.const 6))))))))
        (local.set $a7 (f64.add (local.get $a7) (f64.mul (local.get $t) (f64.promote_f32 (f32.load (i32.add (local.get $p) (i32.mul (local.get $rb) (i32.const 7))))))))
        (local.set $p (i32.add (local.get $p) (i32.const 4)))
        (local.set $j (i32.add (local.get $j) (i32.const 1)))
        (br $taps8)))
      (local.set $p (i32.add (local.get $out) (i32.shl (local.get $m) (i32.const 2))))
      (f32.store offset=0 (local.get $p) (f32.demote_f64 (local.get $a0)))
      (f32.store offset=4 (local.get $p) (f32.demote_f64 (local.get $a1)))
      (f32.store offset=8 (local.get $p) (f32.demote_f64 (local.get $a2)))
      (f32.store offset=12 (local.get $p) (f32.demote_f64 (local.get $a3)))
      (f32.store offset=16 (local.get $p) (f32.demote_f64 (local.get $a4)))
      (f32.store offset=20 (local.get $p) (f32.demote_f64 (local.get $a5)))
      (f32.store offset=24 (local.get $p) (f32.demote_f64 (local.get $a6)))
      (f32.store offset=28 (local.get $p) (f32.demote_f64 (local.get $a7)))
      (local.set $m (i32.add (local.get $m) (i32.const 8)))
      (local.set $i (i32.add (local.get $i) (i32.shl (local.get $r) (i32.const 3))))
      (br $eight)))
    (block $done1 (loop $one
      (br_if $done1 (i32.ge_s (local.get $i) (local.get $count)))
      (local.set $a0 (f64.const 0))
      (local.set $p (i32.add (local.get $src) (i32.shl (local.get $i) (i32.const 2))))
      (local.set $j (i32.const 0))
      (block $doneTaps1 (loop $taps1
        (br_if $doneTaps1 (i32.ge_s (local.get $j) (local.get $n)))
        (local.set $a0 (f64.add (local.get $a0) (f64.mul (f64.load (i32.add (local.get $taps) (i32.shl (local.get $j) (i32.const 3)))) (f64.promote_f32 (f32.load (local.get $p))))))
        (local.set $p (i32.add (local.get $p) (i32.const 4)))
        (local.set $j (i32.add (local.get $j) (i32.const 1)))
        (br $taps1)))
      (f32.store (i32.add (local.get $out) (i32.shl (local.get $m) (i32.const 2))) (f32.demote_f64 (local.get $a0)))
      (local.set $m (i32.add (local.get $m) (i32.const 1)))
      (local.set $i (i32.add (local.get $i) (local.get $r)))
      (br $one)))
    (local.get $m))
)
