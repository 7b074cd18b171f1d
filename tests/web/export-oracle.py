"""Independent check of an exported bundle with Python's standard library and the jsonschema
package: zip integrity (CRC-32 of every member), JSON Schema 2020-12 validity of session.json and
manifest.json against docs/session-bundle.schema.json, the track CSV read by the csv module
(RFC 4180 dialect) against the JSON track, the WAV header (RIFF/WAVE, format 3 = IEEE float) and
the HTML report parsed by html.parser (no script, no event-handler attributes).
Usage: python3 export-oracle.py bundle.zip schema.json  -> prints one JSON object."""
import csv, io, json, struct, sys, zipfile
from html.parser import HTMLParser
import jsonschema

bundle, schema_path = sys.argv[1], sys.argv[2]
schema = json.load(open(schema_path))
out = {}
z = zipfile.ZipFile(bundle)
out["badMember"] = z.testzip()
manifest = json.loads(z.read("manifest.json"))
manifest_schema = dict(schema["$defs"]["manifest"])
manifest_schema["$defs"] = schema["$defs"]
out["manifestErrors"] = [e.message for e in jsonschema.Draft202012Validator(manifest_schema).iter_errors(manifest)]
out["sessions"] = []

class Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags = set()
        self.handlers = []
    def handle_starttag(self, tag, attrs):
        self.tags.add(tag)
        self.handlers += [k for k, _ in attrs if k.lower().startswith("on")]

for item in manifest["sessions"]:
    folder = item["folder"]
    s = json.loads(z.read(folder + "/session.json"))
    res = {"id": item["id"]}
    res["schemaErrors"] = [f"{list(e.path)}: {e.message}" for e in jsonschema.Draft202012Validator(schema).iter_errors(s)]
    raw = z.read(folder + "/track.csv").decode("utf-8")
    res["crlf"] = raw.count("\r\n") == raw.count("\n")
    rows = list(csv.reader(io.StringIO(raw, newline="")))
    header, body = rows[0], rows[1:]
    res["header"] = header
    t = s["track"]
    def num(cell):
        return float("nan") if cell == "" else float(cell)
    def same(a, b):
        if isinstance(b, str):
            b = float(b.replace("Infinity", "inf"))
        return (a != a and b != b) or a == b
    mism = 0
    for i, r in enumerate(body):
        rec = dict(zip(header, r))
        if not (same(num(rec["time_s"]), t["timeS"][i]) and same(num(rec["frequency_hz"]), t["frequencyHz"][i])
                and same(num(rec["amplitude_dbfs"]), t["amplitudeDbfs"][i]) and same(num(rec["level_dbfs"]), t["levelDbfs"][i])
                and rec["state"] == t["state"][i] and (rec["is_clipped"] == "1") == t["isClipped"][i]):
            mism += 1
    res["csvRows"] = len(body)
    res["csvMismatches"] = mism
    if item["hasAudio"]:
        w = z.read(folder + "/audio.wav")
        riff, size, wave, fmt, fmtlen, tag, ch, rate, byterate, align, bits = struct.unpack("<4sI4s4sIHHIIHH", w[:36])
        data_size = struct.unpack("<I", w[40:44])[0]
        res["wav"] = {"riff": riff.decode(), "wave": wave.decode(), "formatTag": tag, "channels": ch, "rateHz": rate, "bits": bits,
                      "samples": data_size // (bits // 8), "riffSizeOk": size == len(w) - 8,
                      "first": list(struct.unpack("<4f", w[44:60])) if tag == 3 else [x / 32768 for x in struct.unpack("<4h", w[44:52])]}
    p = Tags()
    p.feed(z.read(folder + "/report.html").decode("utf-8"))
    res["htmlTags"] = sorted(p.tags)
    res["htmlHandlers"] = p.handlers
    out["sessions"].append(res)
print(json.dumps(out))
