# Shared by the benchmark scripts (sourced, not run): `measure CMD...` runs CMD $runs times and
# prints "median_seconds median_peak_MB": wall time from the clock in nanoseconds (time -v prints
# only hundredths) and peak resident memory from /usr/bin/time -v. Needs $runs and $out set.
measure() {
    local secs=() mbs=() log="$out/time.log"
    for _ in $(seq "$runs"); do
        # Wall time from the clock in nanoseconds (time -v prints only hundredths).
        local t0 t1
        t0="$(date +%s%N)"
        /usr/bin/time -v "$@" >/dev/null 2>"$log"
        t1="$(date +%s%N)"
        secs+=("$(awk -v a="$t0" -v b="$t1" 'BEGIN {printf "%.3f", (b - a) / 1e9}')")
        mbs+=("$(awk -F': ' '/Maximum resident set size/ {printf "%.1f", $2/1024}' "$log")")
    done
    local ms mm
    ms="$(printf '%s\n' "${secs[@]}" | sort -g | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}')"
    mm="$(printf '%s\n' "${mbs[@]}" | sort -g | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}')"
    echo "$ms $mm"
}

