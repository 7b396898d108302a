#!/usr/bin/env python3
"""browser_check.py — open a report page in headless Chromium through ChromeDriver (the W3C
WebDriver protocol over HTTP, standard library only) and check what a person would see:
no console errors, every <audio> has a finite duration matching its WAV, every <img> has
a non-zero natural size. Saves a full-page screenshot.

Usage: browser_check.py INDEX_HTML SCREENSHOT_PNG
Exit 0 on success, 1 on a failed check, 77 when Chromium or ChromeDriver is missing.
"""
import base64, json, os, socket, subprocess, sys, tempfile, time, urllib.request, wave

CHROMIUM, DRIVER = "/usr/bin/chromium", "/usr/bin/chromedriver"


def free_port():
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()
    return port


def call(base, method, path, body=None, timeout=60):
    data = None if body is None else json.dumps(body).encode()
    req = urllib.request.Request(base + path, data=data, method=method, headers={"Content-Type": "application/json"})
    try:
        with urllib.request.urlopen(req, timeout=timeout) as r:
            return json.loads(r.read() or b"{}").get("value")
    except urllib.error.HTTPError as e:
        raise RuntimeError(f"{method} {path}: {e.code} {e.read()[:400]!r}")


def main():
    index, shot = os.path.abspath(sys.argv[1]), sys.argv[2]
    if not (os.access(CHROMIUM, os.X_OK) and os.access(DRIVER, os.X_OK)):
        print(f"SKIP: {CHROMIUM} or {DRIVER} is not installed (Debian packages chromium, chromium-driver)")
        return 77
    port = free_port()
    driver = subprocess.Popen([DRIVER, f"--port={port}"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    base = f"http://127.0.0.1:{port}"
    profile = tempfile.mkdtemp(prefix="tessera-chromium-")
    try:
        for _ in range(100):
            try:
                call(base, "GET", "/status", timeout=2)
                break
            except Exception:
                time.sleep(0.1)
        caps = {"capabilities": {"alwaysMatch": {
            "browserName": "chrome",
            "goog:chromeOptions": {"binary": CHROMIUM, "args": [
                "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
                "--disable-component-update", "--disable-sync", "--autoplay-policy=no-user-gesture-required",
                f"--user-data-dir={profile}", "--window-size=1280,1000"]},
            "goog:loggingPrefs": {"browser": "ALL"}}}}
        sid = call(base, "POST", "/session", caps)["sessionId"]
        s = f"/session/{sid}"
        call(base, "POST", s + "/url", {"url": "file://" + index})
        # Wait until every player has read its WAV header (readyState >= 1) or failed.
        state = None
        for _ in range(100):
            state = call(base, "POST", s + "/execute/sync", {"script": """
                return {audio: Array.from(document.querySelectorAll('audio')).map(a => ({
                          src: a.getAttribute('src'), ready: a.readyState, duration: a.duration,
                          error: a.error ? a.error.code : 0})),
                        images: Array.from(document.querySelectorAll('img')).map(i => ({
                          src: i.getAttribute('src'), complete: i.complete, w: i.naturalWidth, h: i.naturalHeight})),
                        height: document.documentElement.scrollHeight};""", "args": []})
            if all(a["ready"] >= 1 or a["error"] for a in state["audio"]) and all(i["complete"] for i in state["images"]):
                break
            time.sleep(0.1)
        bad = []
        folder = os.path.dirname(index)
        if not state["audio"]:
            bad.append("the page has no <audio> players")
        for a in state["audio"]:
            with wave.open(os.path.join(folder, a["src"])) as w:
                want = w.getnframes() / w.getframerate()
            d = a["duration"]
            if a["error"] or d is None or not isinstance(d, (int, float)) or abs(d - want) > 0.05:
                bad.append(f"<audio src={a['src']}>: duration {d} (error {a['error']}), the WAV holds {want:.3f} s")
        for i in state["images"]:
            if not (i["w"] and i["h"]):
                bad.append(f"<img src={i['src']}>: natural size {i['w']} x {i['h']}")
        logs = call(base, "POST", s + "/se/log", {"type": "browser"}) or []
        for entry in logs:
            if entry.get("level") in ("SEVERE", "ERROR"):
                bad.append("console: " + entry.get("message", "")[:300])
        # Full-page screenshot: grow the window to the page's height first.
        call(base, "POST", s + "/window/rect", {"width": 1280, "height": min(16000, int(state["height"]) + 40)})
        png = base64.b64decode(call(base, "GET", s + "/screenshot"))
        os.makedirs(os.path.dirname(os.path.abspath(shot)), exist_ok=True)
        open(shot, "wb").write(png)
        call(base, "DELETE", s)
        print(f"browser: {len(state['audio'])} players, {len(state['images'])} images, "
              f"{len(logs)} console messages; screenshot {shot} ({len(png)} bytes)")
        for b in bad:
            print("FAIL:", b)
        return 1 if bad else 0
    finally:
        driver.terminate()
        driver.wait(timeout=10)
        subprocess.run(["rm", "-rf", profile])


if __name__ == "__main__":
    sys.exit(main())
