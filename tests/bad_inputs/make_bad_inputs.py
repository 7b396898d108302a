#!/usr/bin/env python3
# make_bad_inputs.py — writes the damaged and odd files that tests/bad_inputs/cases.tsv
# feeds to the real binary. Deterministic (no randomness beyond a fixed seed), so a failing
# case can be rerun by hand. Needs the Python standard library and NumPy (Debian's
# python3-numpy). Usage: make_bad_inputs.py WORK MODEL TOKENS
#   WORK    folder to fill (audio/, configs/, corpus-*/, models/, tokens/, lists/, accepted/resume-*/)
#   MODEL   a good model.safetensors (from a tiny training run); damaged copies are derived
#   TOKENS  a good .npy code file made by MODEL; damaged copies are derived
import json
import math
import os
import random
import struct
import sys

import numpy as np

work, model_path, tokens_path = sys.argv[1:4]
RATE = 16000


def put(rel, data, mode="wb"):
    path = os.path.join(work, rel)
    os.makedirs(os.path.dirname(path), exist_ok=True)
    with open(path, mode) as f:
        f.write(data)
    return path


# --- audio ----------------------------------------------------------------------------
# RIFF/WAVE canonical layout (Microsoft RIFF multimedia spec, 1991): "RIFF" size "WAVE",
# a 16-byte "fmt " chunk (format tag, channels, rate, byte rate, block align, bits), "data".
def wav(rel, frames, channels=1, rate=RATE, fmt_tag=1, bits=16, claimed=None, header_channels=None):
    frames = np.asarray(frames)
    if fmt_tag == 3:
        data = frames.astype("<f4").tobytes()
    else:
        data = np.clip(np.round(frames * 32767), -32768, 32767).astype("<i2").tobytes()
    n = len(data) if claimed is None else claimed
    ch = channels if header_channels is None else header_channels
    block = max(ch, 1) * bits // 8
    hdr = b"RIFF" + struct.pack("<I", 36 + n) + b"WAVE"
    hdr += b"fmt " + struct.pack("<IHHIIHH", 16, fmt_tag, ch, rate, rate * block, block, bits)
    hdr += b"data" + struct.pack("<I", n)
    put(rel, hdr + data)


t = np.arange(RATE) / RATE
# A voiced-speech-like test tone: 120 Hz fundamental with decaying harmonics, 4 Hz syllable envelope.
tone = sum(0.3 / k * np.sin(2 * math.pi * 120 * k * t) for k in range(1, 20)) * (0.6 + 0.4 * np.sin(2 * math.pi * 4 * t))
put("audio/not-audio.wav", b"these are words, not sound\n" * 20)
put("audio/empty.wav", b"")
wav("audio/truncated.wav", tone[:100], claimed=2 * RATE)
wav("audio/zero-frames.wav", np.zeros(0))
wav("audio/zero-channels.wav", tone, header_channels=0)
wav("audio/absurd-rate.wav", tone, rate=2_000_000_000)
wav("audio/rate-1hz.wav", tone, rate=1)
nan = tone.astype(np.float32).copy()
nan[4000] = np.nan
wav("audio/nan.wav", nan, fmt_tag=3, bits=32)
inf = tone.astype(np.float32).copy()
inf[8000] = np.inf
wav("audio/inf.wav", inf, fmt_tag=3, bits=32)
# 8 interleaved channels: the tone at 8 different gains.
eight = np.stack([tone * (0.2 + 0.1 * c) for c in range(8)], axis=1).reshape(-1)
wav("audio/eight-channels.wav", eight, channels=8)
wav("audio/short-50ms.wav", tone[: RATE // 20])   # 800 samples: less than one 1024-point window
wav("audio/silence.wav", np.zeros(RATE))
# A 200 Hz square wave at full scale: every sample is at ±32767, as in a hard-clipped recording.
wav("audio/clipped-square.wav", np.sign(np.sin(2 * math.pi * 200 * t + 0.1)))
wav("audio/good.wav", tone)
# A list file whose lines climb out of its folder: their outputs must still land inside --out.
wav("elsewhere/escape.wav", tone)
put("lists/escape.txt", b"../elsewhere/escape.wav\n")

# --- configs (each message must name the file, the line and the key) ------------------
configs = {
    "syntax-error": "audio:\n  n_fft: [512, 1024\n  hop_length: 160\n",
    "unknown-key": "model:\n  channels: 16\n  chanels: 8\n",
    "unknown-section": "audio:\n  n_fft: 512\nmodle:\n  channels: 16\n",
    "wrong-type": "train:\n  steps: many\n",
    "wrong-type-list": "model:\n  strides: 2\n",
    "negative-size": "train:\n  batch_size: -4\n",
    "zero-size": "model:\n  channels: 0\n",
    "zero-hop": "audio:\n  hop_length: 0\n",
    "hop-over-window": "audio:\n  n_fft: 512\n  win_length: 400\n  hop_length: 800\n",
    "mels-over-bins": "audio:\n  n_fft: 128\n  win_length: 128\n  hop_length: 32\n  n_mels: 80\n",
    "absurd-bits": "codebooks:\n  stages: 24\n  codes: 32768\n  kmeans_init_vectors: 65536\n",
    "not-a-mapping": "- audio\n- model\n",
}
for name, text in configs.items():
    put(f"configs/{name}.yaml", text.encode())
os.makedirs(os.path.join(work, "corpus-empty"), exist_ok=True)
for i in range(3):
    put(f"corpus-unreadable/take-{i}.wav", b"not a recording\n")

# --- models (safetensors: u64 header length, JSON header, data block) -----------------
good_model = open(model_path, "rb").read()
hlen = struct.unpack("<Q", good_model[:8])[0]
header = json.loads(good_model[8 : 8 + hlen])
data = good_model[8 + hlen :]
tensors = sorted((k for k in header if k != "__metadata__"), key=lambda k: header[k]["data_offsets"][0])


def model(rel, hdr, payload=data):
    h = json.dumps(hdr, separators=(",", ":")).encode()
    h += b" " * (-len(h) % 8)
    put(rel, struct.pack("<Q", len(h)) + h + payload)


def edited(edit):
    h = json.loads(json.dumps(header))
    edit(h)
    return h


put("models/truncated.safetensors", good_model[: len(good_model) // 2])
put("models/empty.safetensors", b"")
put("models/header-beyond-file.safetensors", struct.pack("<Q", len(good_model) * 4) + good_model[8:])
put("models/header-not-json.safetensors", good_model[:8] + b"\x00\xff" * (hlen // 2) + data)
last = tensors[-1]
model("models/offsets-outside.safetensors",
      edited(lambda h: h[last].__setitem__("data_offsets", [h[last]["data_offsets"][0], len(data) + 4096])))
first = tensors[0]
model("models/dtype-i32.safetensors", edited(lambda h: h[first].__setitem__("dtype", "I32")))
model("models/bad-format.safetensors", edited(lambda h: h["__metadata__"].__setitem__("format", "something-else")))
model("models/version-99.safetensors", edited(lambda h: h["__metadata__"].__setitem__("format_version", "99")))
# The stored config says 32 channels; the tensors were made with 16.
model("models/config-disagrees.safetensors",
      edited(lambda h: h["__metadata__"].__setitem__("config", h["__metadata__"]["config"].replace("channels: 16", "channels: 32", 1))))
tampered = bytearray(data)
tampered[len(tampered) // 2] ^= 0x40
model("models/weights-edited.safetensors", header, bytes(tampered))

# --- tokens (NumPy NEP 1 .npy format 1.0: magic, version, u16 header length, dict) ----
good_tok = open(tokens_path, "rb").read()
thlen = struct.unpack("<H", good_tok[8:10])[0]
tdata = good_tok[10 + thlen :]
rows = len(tdata) // 6


def npy(rel, head, payload=tdata):
    h = head.encode("latin1")
    h += b" " * ((64 - (10 + len(h) + 1) % 64) % 64) + b"\n"
    put(rel, b"\x93NUMPY\x01\x00" + struct.pack("<H", len(h)) + h + payload)


os.makedirs(os.path.join(work, "tokens"), exist_ok=True)
np.save(os.path.join(work, "tokens/float32.npy"), np.zeros((rows, 3), dtype=np.float32))
np.save(os.path.join(work, "tokens/fortran.npy"), np.asfortranarray(np.zeros((rows, 3), dtype=np.int16)))
np.save(os.path.join(work, "tokens/code-16.npy"), np.full((rows, 3), 16, dtype=np.int16))
np.save(os.path.join(work, "tokens/negative.npy"), np.full((rows, 3), -1, dtype=np.int16))
np.save(os.path.join(work, "tokens/depth-0.npy"), np.zeros((rows, 0), dtype=np.int16))
np.save(os.path.join(work, "tokens/depth-5.npy"), np.zeros((rows, 5), dtype=np.int16))
npy("tokens/int64.npy", "{'descr': '<i8', 'fortran_order': False, 'shape': (%d, 3), }" % rows)
npy("tokens/big-endian.npy", "{'descr': '>i2', 'fortran_order': False, 'shape': (%d, 3), }" % rows)
npy("tokens/shape-beyond-data.npy", "{'descr': '<i2', 'fortran_order': False, 'shape': (%d, 3), }" % (rows + 1))
npy("tokens/huge-shape.npy", "{'descr': '<i2', 'fortran_order': False, 'shape': (4611686018427387904, 3), }")
put("tokens/bad-magic.npy", b"\x93NUMPZ" + good_tok[6:])
put("tokens/version-9.npy", good_tok[:6] + b"\x09\x00" + good_tok[8:])
put("tokens/header-beyond-file.npy", good_tok[:8] + struct.pack("<H", 60000) + good_tok[10:])
# Seeded damage inside the header dict: positions and bytes that make it unparsable.
rng = random.Random(8)
fuzzed = bytearray(good_tok)
for _ in range(6):
    fuzzed[rng.randrange(11, 10 + thlen - 20)] = rng.choice(b"{}()[]:'\"\x00\xff")
put("tokens/header-fuzzed.npy", bytes(fuzzed))
# A code file whose manifest names another model.
put("tokens/other-model/codes.npy", good_tok)
line = {"source": "x.wav", "tokens": "codes.npy", "duration_s": 1.0, "frames": rows, "depth": 3,
        "sample_rate": RATE, "frame_rate": 25.0, "model_id": "00000000deadbeef", "codebook_size": 16}
put("tokens/other-model/manifest.jsonl", (json.dumps(line) + "\n").encode())

# --- manifests read by `tessera encode` when it resumes into accepted/resume-*/ -------
# Each line names a path outside the output folder; the target is a FIFO, so a reader that
# followed it would block (and the driver's timeout would report it) instead of passing.
os.mkfifo(os.path.join(work, "outside.npy"))
outside = os.path.join(work, "outside.npy")
escapes = {
    "resume-dotdot": dict(line, tokens="../../outside.npy", source="../../outside.npy"),
    "resume-absolute": dict(line, tokens=outside, source=outside),
    "resume-malformed": None,
}
for folder, entry in escapes.items():
    text = "{\"source\": \"good.wav\", \"tokens\": \n" if entry is None else json.dumps(entry) + "\n"
    put(f"accepted/{folder}/manifest.jsonl", text.encode())
