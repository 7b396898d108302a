#!/usr/bin/python3
"""Synthesise the tessera demo corpus (fictional ferry announcements) with espeak-ng.

Usage: make_demo_corpus.py OUT_DIR [--sentences FILE] [--jobs N] [--limit N]

Every sentence is spoken by every voice configuration below; speed and pitch vary
deterministically with the sentence index, so two runs give byte-identical files.
Each file: espeak-ng -w (22.05 kHz) -> resample to 16 kHz (polyphase, 320/441) ->
trim or pad the silence to 50 ms each side -> peak-normalise to -3 dBFS -> 16-bit mono WAV.
Split: every 10th sentence (s010, s020, ...) is held out with all its voices, so
held-out text is never seen in training.  Needs only espeak-ng, numpy and scipy.
"""

import argparse
import json
import multiprocessing
import os
import subprocess
import sys
import tempfile
import time
import wave

import numpy as np
from scipy.signal import resample_poly

OUT_RATE = 16000
ESPEAK_RATE = 22050  # espeak-ng's native output rate
PEAK_DBFS = -3.0
MARGIN_S = 0.05  # silence kept before the first and after the last voiced frame
TRIM_DB = -45.0  # a 10 ms frame below this RMS (relative to the file's peak) is silence
HELDOUT_EVERY = 10

# (folder name, espeak-ng voice "language+variant"); 4 male-, 4 female-sounding.
VOICES = [
    ("gb-m3", "en-gb+m3"),
    ("us-f2", "en-us+f2"),
    ("scotland-m1", "en-gb-scotland+m1"),
    ("rp-f4", "en-gb-x-rp+f4"),
    ("caribbean-m5", "en-029+m5"),
    ("us-klatt", "en-us+klatt"),
    ("lancaster-f3", "en-gb-x-gbclan+f3"),
    ("midlands-f5", "en-gb-x-gbcwmd+f5"),
]

SPEEDS = list(range(140, 191, 5))  # words per minute, 11 steps
PITCHES = list(range(35, 71, 5))  # espeak-ng pitch 0..99, 8 steps


def prosody(sentence_index, voice_index):
    """Speed and pitch for one (sentence, voice): a fixed walk, no randomness."""
    speed = SPEEDS[(7 * sentence_index + 3 * voice_index) % len(SPEEDS)]
    pitch = PITCHES[(5 * sentence_index + 3 * voice_index) % len(PITCHES)]
    return speed, pitch


def sentence_id(index):
    return "s%03d" % (index + 1)


def split_of(index):
    return "heldout" if (index + 1) % HELDOUT_EVERY == 0 else "train"


def read_wav_int16(path):
    with wave.open(path, "rb") as w:
        if w.getsampwidth() != 2 or w.getnchannels() != 1:
            raise ValueError("%s: expected 16-bit mono" % path)
        rate = w.getframerate()
        data = np.frombuffer(w.readframes(w.getnframes()), dtype="<i2")
    return data, rate


def write_wav_int16(path, samples, rate):
    with wave.open(path, "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(rate)
        w.writeframes(samples.astype("<i2").tobytes())


def complete_wav_seconds(path):
    """Duration of an existing, well-formed output file, or None if absent/damaged."""
    try:
        with wave.open(path, "rb") as w:
            ok = (w.getnchannels() == 1 and w.getsampwidth() == 2
                  and w.getframerate() == OUT_RATE and w.getnframes() > 0)
            n = w.getnframes()
        # The header's frame count must match the bytes actually on disk.
        if ok and os.path.getsize(path) == 44 + 2 * n:
            return n / OUT_RATE
    except (OSError, EOFError, wave.Error):
        pass
    return None


def trim_silence(x, rate):
    """Cut or zero-pad leading/trailing silence to MARGIN_S on each side."""
    frame = rate // 100
    n = len(x) // frame
    if n == 0:
        return x
    rms = np.sqrt(np.mean(x[: n * frame].reshape(n, frame) ** 2, axis=1))
    peak = np.max(np.abs(x))
    voiced = np.nonzero(rms > peak * 10.0 ** (TRIM_DB / 20.0))[0]
    if len(voiced) == 0:
        return x
    margin = int(round(MARGIN_S * rate))
    start = voiced[0] * frame - margin
    stop = (voiced[-1] + 1) * frame + margin
    body = x[max(0, start):min(len(x), stop)]
    # espeak-ng often starts speaking at once: pad so every file has the same margins.
    return np.concatenate([np.zeros(max(0, -start)), body, np.zeros(max(0, stop - len(x)))])


def process(raw, rate):
    """int16 espeak-ng audio -> float64 in [-1, 1] at 16 kHz, trimmed and normalised."""
    if rate != ESPEAK_RATE:
        raise ValueError("espeak-ng wrote %d Hz, expected %d" % (rate, ESPEAK_RATE))
    x = raw.astype(np.float64) / 32768.0
    y = resample_poly(x, 320, 441)  # 22050 * 320 / 441 = 16000
    y = trim_silence(y, OUT_RATE)
    peak = np.max(np.abs(y))
    if peak > 0:
        y *= 10.0 ** (PEAK_DBFS / 20.0) / peak
    return y


def make_one(task):
    """Synthesise one file unless a complete one exists; returns (key, seconds, made)."""
    out_dir, index, voice_index, text = task
    folder, voice = VOICES[voice_index]
    rel = os.path.join(split_of(index), folder, sentence_id(index) + ".wav")
    path = os.path.join(out_dir, rel)
    seconds = complete_wav_seconds(path)
    if seconds is not None:
        return (index, voice_index, rel, seconds, False)

    os.makedirs(os.path.dirname(path), exist_ok=True)
    speed, pitch = prosody(index, voice_index)
    with tempfile.TemporaryDirectory(prefix="tessera-espeak-") as tmp:
        raw_path = os.path.join(tmp, "raw.wav")
        cmd = ["espeak-ng", "-v", voice, "-s", str(speed), "-p", str(pitch),
               "-w", raw_path, text]
        done = subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        if done.returncode != 0:
            raise RuntimeError("espeak-ng failed (exit %d) for %s: %s" % (
                done.returncode, rel, done.stderr.decode(errors="replace").strip()))
        raw, rate = read_wav_int16(raw_path)
    y = process(raw, rate)
    pcm = np.clip(np.round(y * 32767.0), -32768, 32767).astype(np.int16)

    # Temp name in the same folder, then rename: a file at `path` is always complete.
    part = path + ".part%d" % os.getpid()
    write_wav_int16(part, pcm, OUT_RATE)
    os.replace(part, path)
    return (index, voice_index, rel, len(pcm) / OUT_RATE, True)


def read_sentences(path):
    with open(path, encoding="utf-8") as f:
        lines = [line.strip() for line in f]
    sentences = [s for s in lines if s]
    for s in sentences:
        if s.startswith("-"):  # would be read by espeak-ng as an option
            raise SystemExit("sentence starts with '-': %r" % s)
    return sentences


def remove_stale_parts(out_dir):
    """Delete half-written files left by an interrupted run (ours end in .wav.partPID)."""
    for split in ("train", "heldout"):
        for root, _, files in os.walk(os.path.join(out_dir, split)):
            for name in files:
                if ".wav.part" in name:
                    os.remove(os.path.join(root, name))


def write_text_atomic(path, text):
    part = path + ".part"
    with open(part, "w", encoding="utf-8", newline="\n") as f:
        f.write(text)
    os.replace(part, path)


README_TXT = """\
tessera demo corpus
===================

Every file in this folder is SYNTHETIC speech, made by the tessera project's script
samples/make_demo_corpus.py with the espeak-ng speech synthesiser. No human voice
was recorded. The texts are announcements of a fictional harbour ferry service;
all service, place and boat names are invented.

Layout: train/<voice>/<id>.wav and heldout/<voice>/<id>.wav, 16 kHz mono 16-bit PCM,
peak -3 dBFS, about 50 ms of silence at each end. Every 10th sentence (s010, s020, ...)
is held out in all voices, so held-out text never occurs in train/.
corpus.jsonl lists one file per line: path (relative to this folder), split, voice,
espeak_voice, speed, pitch, text, duration_s.
"""


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("out_dir", help="output folder (created if missing)")
    ap.add_argument("--sentences", default=os.path.join(here, "sentences.txt"),
                    help="one sentence per line (default: sentences.txt beside this script)")
    ap.add_argument("--jobs", type=int, default=os.cpu_count() or 1,
                    help="parallel workers (default: all cores)")
    ap.add_argument("--limit", type=int, default=None,
                    help="use only the first N sentences")
    args = ap.parse_args()
    if args.jobs < 1:
        ap.error("--jobs must be at least 1, got %d" % args.jobs)

    sentences = read_sentences(args.sentences)
    if args.limit is not None:
        sentences = sentences[: max(0, args.limit)]
    out_dir = os.path.abspath(args.out_dir)
    os.makedirs(out_dir, exist_ok=True)
    remove_stale_parts(out_dir)

    tasks = [(out_dir, i, v, text) for i, text in enumerate(sentences)
             for v in range(len(VOICES))]
    total = len(tasks)
    results = []
    made = 0
    t0 = time.monotonic()
    last_print = 0.0
    with multiprocessing.Pool(args.jobs) as pool:
        for r in pool.imap_unordered(make_one, tasks, chunksize=4):
            results.append(r)
            made += r[4]
            now = time.monotonic() - t0
            if now - last_print >= 2.0 or len(results) == total:
                last_print = now
                rate = len(results) / now if now > 0 else 0.0
                print("%d/%d files (%d new, %d skipped) %.1f s, %.1f files/s"
                      % (len(results), total, made, len(results) - made, now, rate),
                      flush=True)

    results.sort(key=lambda r: (r[0], r[1]))
    lines = []
    for index, v, rel, seconds, _ in results:
        speed, pitch = prosody(index, v)
        lines.append(json.dumps({
            "path": rel.replace(os.sep, "/"),
            "split": split_of(index),
            "voice": VOICES[v][0],
            "espeak_voice": VOICES[v][1],
            "speed": speed,
            "pitch": pitch,
            "text": sentences[index],
            "duration_s": round(seconds, 4),
        }, ensure_ascii=False))
    write_text_atomic(os.path.join(out_dir, "corpus.jsonl"), "\n".join(lines) + "\n")
    write_text_atomic(os.path.join(out_dir, "README.txt"), README_TXT)

    audio = sum(r[3] for r in results)
    held = sum(1 for r in results if split_of(r[0]) == "heldout")
    print("done: %d files (%d train, %d heldout), %.1f min of audio, %.1f s wall"
          % (total, total - held, held, audio / 60.0, time.monotonic() - t0))
    return 0


if __name__ == "__main__":
    sys.exit(main())
