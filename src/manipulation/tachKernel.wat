;; The tach edge detector's per-sample loop (speedFromTach.ts), in WebAssembly.
;; Compiled by `npm run build:kernel` (wabt) into tachKernelWasm.ts; test/tachKernel.test.ts
;; checks that the committed bytes are this text's, and the edges against the loop in JavaScript.
;;
;; It computes exactly what the JavaScript loop it replaced computed (that loop is kept in the
;; test), in the same order and float64 precision (a float32 sample promoted to float64 is exact;
;; wasm has no fused multiply-add here, so every product and sum rounds as in JavaScript): the
;; envelope, its thresholds, the hysteresis state and the interpolated mid-level crossing. It stops at a sample that completes an edge, so JavaScript can
;; judge the edge (onEdge) and call again from the next sample.
;;
;; Its own memory (exported): the detector's state at byte 0 (hi, lo, prevX, crossingS as f64,
;; the state as i32 at 32: 0 unknown, 1 low, 2 high) and samples from byte 64 (float32).
(module
  (memory (export "memory") 2)

  ;; Runs samples from..n-1 of the float32 array at `src`; `first` is the stream index of
  ;; src[0]. Returns the index of the sample that completes an edge (the crossing's time is then
  ;; in the state's crossingS, the state is high), or n when none did.
  (func $tachEdges (export "tachEdges")
    (param $src i32) (param $from i32) (param $n i32) (param $st i32) (param $first f64)
    (param $relax f64) (param $warmup f64) (param $originS f64) (param $dtS f64) (result i32)
    (local $i i32) (local $x f64) (local $hi f64) (local $lo f64) (local $prevX f64)
    (local $crossingS f64) (local $state i32) (local $was f64) (local $span f64) (local $mid f64)
    (local $edge i32)
    (local.set $hi (f64.load offset=0 (local.get $st)))
    (local.set $lo (f64.load offset=8 (local.get $st)))
    (local.set $prevX (f64.load offset=16 (local.get $st)))
    (local.set $crossingS (f64.load offset=24 (local.get $st)))
    (local.set $state (i32.load offset=32 (local.get $st)))
    (local.set $edge (local.get $n))
    (local.set $i (local.get $from))
    ;; The stream's first sample starts the envelope at its own value (when usable).
    (if (i32.and (i32.and (f64.eq (local.get $first) (f64.const 0)) (i32.eqz (local.get $i)))
                 (i32.lt_u (local.get $i) (local.get $n)))
      (then
        (local.set $x (f64.promote_f32 (f32.load (local.get $src))))
        (if (f64.lt (f64.abs (local.get $x)) (f64.const inf))
          (then
            (local.set $hi (local.get $x))
            (local.set $lo (local.get $x))
            (local.set $prevX (local.get $x)))
          (else
            (local.set $prevX (f64.const nan))
            (local.set $crossingS (f64.const nan))))
        (local.set $i (i32.const 1))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
        (local.set $x (f64.promote_f32 (f32.load
          (i32.add (local.get $src) (i32.shl (local.get $i) (i32.const 2))))))
        ;; Every sample that is usable ends by becoming the previous one (prevX), whichever way
        ;; it leaves $keep; a sample that is not breaks continuity instead.
        (block $continue
          (if (i32.eqz (f64.lt (f64.abs (local.get $x)) (f64.const inf)))
            (then
              (local.set $prevX (f64.const nan))
              (local.set $crossingS (f64.const nan))
              (br $continue)))
          (block $keep
            (local.set $was (f64.sub (local.get $hi) (local.get $lo)))
            (local.set $hi (select (local.get $x)
              (f64.sub (local.get $hi) (f64.mul (local.get $was) (local.get $relax)))
              (f64.gt (local.get $x) (local.get $hi))))
            (local.set $lo (select (local.get $x)
              (f64.add (local.get $lo) (f64.mul (local.get $was) (local.get $relax)))
              (f64.lt (local.get $x) (local.get $lo))))
            (local.set $span (f64.sub (local.get $hi) (local.get $lo)))
            (br_if $keep (i32.eqz (f64.gt (local.get $span) (f64.const 0))))
            (local.set $mid (f64.add (local.get $lo) (f64.mul (f64.const 0.5) (local.get $span))))
            ;; Most samples change nothing but the envelope: while low, one below the mid level;
            ;; while high, one not below the low threshold.
            (if (i32.eq (local.get $state) (i32.const 1))
              (then (br_if $keep (f64.lt (local.get $x) (local.get $mid))))
              (else
                (if (i32.eq (local.get $state) (i32.const 2))
                  (then (br_if $keep (f64.ge (local.get $x)
                    (f64.add (local.get $lo) (f64.mul (f64.const 0.4) (local.get $span)))))))))
            ;; An upward mid-level crossing while not high, interpolated between samples n-1 and n:
            ;; originS + (first + i - 1 + frac) dtS.
            (if (i32.and
                  (i32.and (i32.ne (local.get $state) (i32.const 2)) (f64.eq (local.get $prevX) (local.get $prevX)))
                  (i32.and (f64.lt (local.get $prevX) (local.get $mid)) (f64.ge (local.get $x) (local.get $mid))))
              (then
                (local.set $crossingS (f64.add (local.get $originS) (f64.mul
                  (f64.add
                    (f64.sub (f64.add (local.get $first) (f64.convert_i32_u (local.get $i))) (f64.const 1))
                    (f64.div (f64.sub (local.get $mid) (local.get $prevX)) (f64.sub (local.get $x) (local.get $prevX))))
                  (local.get $dtS))))))
            (if (f64.gt (local.get $x) (f64.add (local.get $lo) (f64.mul (f64.const 0.6) (local.get $span))))
              (then
                (if (i32.and
                      (i32.and (i32.eq (local.get $state) (i32.const 1)) (f64.eq (local.get $crossingS) (local.get $crossingS)))
                      (f64.ge (f64.add (local.get $first) (f64.convert_i32_u (local.get $i))) (local.get $warmup)))
                  (then
                    (local.set $state (i32.const 2))
                    (local.set $prevX (local.get $x))
                    (local.set $edge (local.get $i))
                    (br $done)))
                (local.set $state (i32.const 2)))
              (else
                (if (f64.lt (local.get $x) (f64.add (local.get $lo) (f64.mul (f64.const 0.4) (local.get $span))))
                  (then (local.set $state (i32.const 1)))))))
          (local.set $prevX (local.get $x)))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (br $next)))
    (f64.store offset=0 (local.get $st) (local.get $hi))
    (f64.store offset=8 (local.get $st) (local.get $lo))
    (f64.store offset=16 (local.get $st) (local.get $prevX))
    (f64.store offset=24 (local.get $st) (local.get $crossingS))
    (i32.store offset=32 (local.get $st) (local.get $state))
    (local.get $edge))
)
