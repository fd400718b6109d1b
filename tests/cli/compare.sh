#!/usr/bin/env bash
# millrace compare: several models fitted to one file.  Each model's fit
# (--fit-json) must be the very fit `millrace fit` makes of that model alone:
# the same bytes of JSON once the run's own record (command line, clock
# times, host) and the timings are taken out, with 1 and 2 threads, for
# models with different complete cases (screening's bmi has missing cells),
# a collapsed one-read fit (falls, poisson with an exposure) beside one
# with --no-collapse, with the cache, without (each later pass rereads the
# file) and in memory, and drop-one refits (fitted in the same first pass).  Oracle: `millrace fit` of each
# model alone, and Python's json module.  Also: a model whose column is not
# in the file fails naming the model and the column; standard input gives
# the same numbers; a bad --drop-one name is refused; the JSON's shape.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
bin=${MILLRACE:-$bin}
py=/usr/bin/python3
cd "$tmp" || exit 1
cp "$root"/samples/*.csv "$root"/samples/*.model .

grep -v '^numeric *bmi' screening.model >screen_nobmi.model
grep -v '^numeric *bmi\|^factor *smoker' screening.model >screen_small.model
grep -v '^interact' falls.model >falls_main.model

# The fit minus what differs between two runs of one model.
strip() {
    "$py" - "$1" <<'PY'
import json, sys
js = json.load(open(sys.argv[1]))
js.pop("run", None)
for k in ("seconds", "rows_per_second", "pass_seconds"):
    js["convergence"].pop(k, None)
js.pop("pass_seconds", None)
print(json.dumps(js, indent=1, sort_keys=True))
PY
}

for threads in 1 2; do
    for set in screen falls; do
        if [ $set = screen ]; then models="screening screen_nobmi screen_small"; data=screening.csv; extra=
        else models="falls falls_main"; data=falls.csv; extra=; fi
        args=()
        for m in $models; do args+=(-m "$m.model"); done
        for collapse in "" --no-collapse --no-cache --in-memory; do
            [ $set = screen ] && [ "$collapse" = --no-collapse ] && continue
            tag=$set-t$threads${collapse#--}
            if ! "$bin" compare --quiet --threads $threads $collapse $extra "${args[@]}" --drop-one "${models%% *}" \
                --fit-json "$tag-" --json "$tag.json" $data >"$tag.out" 2>"$tag.err"; then
                fail "compare $tag" "$(head -c 300 "$tag.err")"
                continue
            fi
            for m in $models; do
                "$bin" fit --quiet --threads $threads $collapse -m "$m.model" --json "alone-$tag-$m.json" $data \
                    >/dev/null 2>&1
                if cmp -s <(strip "$tag-$m.json") <(strip "alone-$tag-$m.json"); then
                    ok "compare $tag: $m's fit is the fit of $m alone"
                else
                    fail "compare $tag: $m" "$(diff <(strip "$tag-$m.json") <(strip "alone-$tag-$m.json") | head -5)"
                fi
            done
        done
    done
done

# The models used different rows: no test between them, a note instead.
check "rows differ: no test, a note" "$py" -c '
import json, sys
js = json.load(open("screen-t1.json"))
used = {m["name"]: m["rows_used"] for m in js["models"]}
assert used["screening"] < used["screen_nobmi"] == used["screen_small"], used
for t in js["nested"]:
    if "screening" in (t["smaller"], t["larger"]):
        assert t["chi_square"] is None and "different rows" in t["note"], t
    else:
        assert t["chi_square"] is not None and t["note"] is None, t
assert {(t["smaller"], t["larger"]) for t in js["nested"]} == {
    ("screen_nobmi", "screening"), ("screen_small", "screening"), ("screen_small", "screen_nobmi")}
assert js["format"] == "millrace-comparison" and js["format_version"] == 1
'
check "falls: drop-one keeps the interaction's factors" "$py" -c '
import json
js = json.load(open("falls-t1.json"))
assert [t["without"] for t in js["drop_one"]] == ["region", "year", "age_band & sex"], js["drop_one"]
'

# A model naming a column the file lacks.
printf 'outcome attended\nfamily binomial\nnumeric income\n' >needs_income.model
"$bin" compare -m screening.model -m needs_income.model screening.csv >missing.out 2>missing.err
rc=$?
if [ $rc -ne 0 ] && grep -q "model needs_income" missing.err && grep -q "income" missing.err && [ ! -s missing.out ]; then
    ok "a missing column fails naming the model and the column (exit $rc)"
else
    fail "missing column" "exit $rc: $(cat missing.err)"
fi
# Standard input: read once, copied once for the models' later passes.
"$bin" compare --quiet -m screening.model -m screen_nobmi.model --no-cache --fit-json stdin- - <screening.csv \
    >stdin.out 2>stdin.err
for m in screening screen_nobmi; do
    if [ -s "stdin-$m.json" ] && fit_values "stdin-$m.json" | cmp -s - <(fit_values "alone-screen-t1-$m.json"); then
        ok "standard input, no cache: $m's numbers are its fit alone"
    else
        fail "standard input: $m" "$(head -c 300 stdin.err)"
    fi
done
"$bin" compare -m screening.model --drop-one nosuch screening.csv >/dev/null 2>drop.err
rc=$?
check "an unknown --drop-one name is a usage error" test $rc -eq 2
"$bin" compare -m screening.model -m screening.model screening.csv >/dev/null 2>twice.err
check "two models of one name refused" grep -q "two models are named 'screening'" twice.err
"$bin" compare -m screening.model --json screening.csv screening.csv >/dev/null 2>json.err
check "the JSON may not replace the data" test $? -eq 2
finish
