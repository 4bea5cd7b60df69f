"""The Python peer of `npm run bench`: scipy.signal.welch on the same frames as the engine.

Started once by bench/spectrumBench.ts with the signal's path (raw little-endian float32); then
each line on stdin is a command, each answer one line on stdout:
  round <calls>  -> microseconds of CPU (time.process_time) per frame over <calls> welch calls
  amplitude      -> JSON list: sqrt(welch(..., scaling='spectrum')) of the first four frames
Each welch call takes four 50 %-overlapped 8192-point frames (default window 'hann', default
detrend 'constant', float64), as the engine's 4-frame average does; calls step by four hops, so
no frame is transformed twice. The bench sets one thread and glibc's mmap threshold.
"""
import json
import sys
import time

import numpy as np
import scipy
from scipy.signal import welch

FS = 25600
N = 8192
HOP = N // 2
SEG = N + 3 * HOP

x = np.fromfile(sys.argv[1], dtype="<f4").astype(np.float64)
starts = list(range(0, len(x) - SEG + 1, 4 * HOP))
print(json.dumps({"scipy": scipy.__version__, "numpy": np.__version__}), flush=True)
call = 0
for line in sys.stdin:
    cmd = line.split()
    if not cmd:
        continue
    if cmd[0] == "round":
        calls = int(cmd[1])
        t0 = time.process_time()
        for _ in range(calls):
            s = starts[call % len(starts)]
            call += 1
            welch(x[s : s + SEG], fs=FS, nperseg=N)
        print((time.process_time() - t0) / (4 * calls) * 1e6, flush=True)
    elif cmd[0] == "amplitude":
        _, pxx = welch(x[:SEG], fs=FS, nperseg=N, scaling="spectrum")
        print(json.dumps(np.sqrt(pxx).tolist()), flush=True)
