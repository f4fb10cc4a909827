#!/usr/bin/env bash
# Validate a demo archive copy (`fluxledger record archive`) as PDF/A-3b and write the result
# to bench/pdfa-validation.txt. Not part of the test suite: it needs Java and Maven, and
# fetches the veraPDF command line (org.verapdf.apps:greenfield-apps) through Maven.
#
#   bash bench/pdfa_validate.sh            # veraPDF, else pikepdf's PDF/A validator
#   VERAPDF_VERSION=1.28.2 bash bench/pdfa_validate.sh
#
# When Maven cannot fetch veraPDF (no route to Maven Central), the file says so and carries
# the verdict of pikepdf.pdfa instead: an allowlist validator whose rule catalogue is taken
# from veraPDF's validation profiles (installed with `pip install 'pikepdf[pdfa]'`). That
# verdict is a second opinion, not veraPDF's.
set -euo pipefail

here="$(cd "$(dirname "$0")" && pwd)"
root="$(dirname "$here")"
py="$root/.venv/bin/python"
fluxledger="$root/.venv/bin/fluxledger"
out="$here/pdfa-validation.txt"
version="${VERAPDF_VERSION:-1.28.2}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

# 1. The demo (invented data): its run 1 is approved; the demo's QA user archives it.
"$fluxledger" demo --out "$work/demo" >/dev/null
qa_password="$("$py" -c 'import tomllib,sys; print(tomllib.load(open(sys.argv[1],"rb"))["users"]["qa.osei"]["password"])' "$root/sample_records/logbook_history.toml")"
printf '%s\n' "$qa_password" | "$fluxledger" record archive 1 --user qa.osei --password-stdin \
    --db "$work/demo/fluxledger.db" --out "$work" --json >"$work/archive.json"
file="$("$py" -c 'import json,sys; print(json.load(open(sys.argv[1]))["file"])' "$work/archive.json")"
"$fluxledger" record verify "$file" --db "$work/demo/fluxledger.db" >"$work/verify.txt" \
    || { cat "$work/verify.txt"; echo "record verify failed on the archive copy" >&2; exit 1; }
own="$("$py" -c 'import sys; from ledger.records.archive import pdfa_problems
p = pdfa_problems(open(sys.argv[1], "rb").read()); print("; ".join(p) if p else "none")' "$file")"

# 2. veraPDF through Maven: a throw-away project whose one dependency is the CLI.
cat >"$work/pom.xml" <<EOF
<project xmlns="http://maven.apache.org/POM/4.0.0">
  <modelVersion>4.0.0</modelVersion>
  <groupId>local.fluxledger</groupId>
  <artifactId>pdfa-validate</artifactId>
  <version>1</version>
  <dependencies>
    <dependency>
      <groupId>org.verapdf.apps</groupId>
      <artifactId>greenfield-apps</artifactId>
      <version>$version</version>
    </dependency>
  </dependencies>
</project>
EOF
validator=""
result=""
if command -v mvn >/dev/null && command -v java >/dev/null \
    && (cd "$work" && mvn -B -q dependency:build-classpath -Dmdep.outputFile=cp.txt \
        >"$work/mvn.log" 2>&1); then
    validator="veraPDF $version (org.verapdf.apps:greenfield-apps, GreenfieldCliWrapper)"
    set +e
    result="$(java -cp "$(cat "$work/cp.txt")" org.verapdf.apps.GreenfieldCliWrapper \
        --flavour 3b --format text --verbose "$file" 2>&1)"
    code=$?
    set -e
    verdict="exit $code"
else
    why="Maven could not fetch org.verapdf.apps:greenfield-apps:$version"
    grep -q "Unknown host\|UnknownHost\|Could not transfer" "$work/mvn.log" 2>/dev/null \
        && why="$why: Maven Central cannot be reached from this machine"
    if ! "$py" -c 'import pikepdf.pdfa' 2>/dev/null; then
        "$root/.venv/bin/pip" install -q 'pikepdf[pdfa]'
    fi
    pike="$("$py" -c 'import pikepdf; print(pikepdf.__version__)')"
    validator="pikepdf.pdfa $pike (veraPDF was not run: $why)"
    set +e
    result="$("$py" -c 'import sys, pikepdf.pdfa as v
r = v.validate_written(sys.argv[1], "3b")
print(r.summary(limit=200))
sys.exit(0 if r.passed else 1)' "$file" 2>&1)"
    code=$?
    set -e
    verdict="exit $code"
fi

{
    echo "PDF/A-3b validation of a fluxledger archive copy (bench/pdfa_validate.sh)"
    echo "date:       $(date -u +%Y-%m-%dT%H:%M:%SZ)"
    echo "fluxledger: $("$py" -c 'import ledger; print(ledger.__version__)')"
    echo "file:       $(basename "$file") (demo run 1, approved; invented data)"
    echo "bytes:      $(wc -c <"$file")"
    echo "sha256:     $(sha256sum "$file" | cut -d' ' -f1)"
    echo "validator:  $validator"
    echo "verdict:    $verdict ($([ "$code" = 0 ] && echo passed || echo FAILED))"
    echo "own checks: ledger.records.archive.pdfa_problems: $own"
    echo "verify:     $(grep -v "^ *$" "$work/verify.txt" | tail -n 1)"
    echo
    echo "validator output:"
    printf '%s\n' "$result"
} >"$out"
cat "$out"
exit "$code"
