#!/usr/bin/env bash
# Fetches the open datasets the tests read (SMS Spam Collection, Banking77) from their public
# sources into $SIEVELINE_DATA_DIR (default ../shared/data), and checks their sha256 sums.
# The datasets are never committed to this repository; see each dataset's README for licence
# and citation.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
dest="${SIEVELINE_DATA_DIR:-$root/../shared/data}"
mkdir -p "$dest/sms-spam" "$dest/banking77"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT

check() { # file sha256
  local got; got="$(sha256sum "$1" | cut -d' ' -f1)"
  if [ "$got" != "$2" ]; then echo "fetch-data: $1 has sha256 $got, expected $2" >&2; exit 1; fi
}

if [ ! -f "$dest/sms-spam/SMSSpamCollection" ]; then
  # SMS Spam Collection v.1 (Almeida, Gomez Hidalgo, Yamakami, DocEng 2011), UCI ML Repository.
  curl -fsSL -o "$tmp/sms.zip" "https://archive.ics.uci.edu/static/public/228/sms+spam+collection.zip"
  (cd "$tmp" && python3 -c "import zipfile; zipfile.ZipFile('sms.zip').extractall('sms')")
  cp "$tmp/sms/SMSSpamCollection" "$tmp/sms/readme" "$dest/sms-spam/"
fi
check "$dest/sms-spam/SMSSpamCollection" 7d039a24a6083ed9ef0f806ebad56bbb976e3aeb8de05669173bfdc4996c239d

base="https://raw.githubusercontent.com/PolyAI-LDN/task-specific-datasets/master/banking_data"
for f in train.csv test.csv categories.json; do
  # Banking77 (Casanueva et al., NLP4ConvAI 2020), CC BY 4.0.
  [ -f "$dest/banking77/$f" ] || curl -fsSL -o "$dest/banking77/$f" "$base/$f"
done
check "$dest/banking77/train.csv" b06e26ac675513959a63135f11b94ea7786ed02da65db93a5650d8838cbc664b
check "$dest/banking77/test.csv" d12d6e3bc4c3103966ae786dc435913c0c563dfa328f5a3646d0e62cfeeb474d
echo "fetch-data: datasets ready in $dest"
