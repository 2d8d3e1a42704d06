#!/usr/bin/env bash
# Runs a winnow spec on Slurm: one array job per phase, each phase waiting
# for the previous one with --dependency=afterok, all tasks sharing one run
# directory on a shared filesystem.
#
#   submit.sh [options] SPEC OUT    submit every phase; prints "PHASE JOBID" lines
#   submit.sh --status JOBS         one line per phase; exit 0 done, 1 failed, 3 still going
#   submit.sh --wait JOBS [SECS]    poll --status until done or failed (default: no limit)
#   submit.sh --resubmit JOBS       rerun only the failed tasks, re-chain the later phases
#
# Options for the first form:
#   --tasks N              array tasks per phase (default 4)
#   --phase-tasks PHASE=N  tasks for one phase (repeatable)
#   --jobs FILE            where to record the job ids (default OUT.jobs)
#   --logs DIR             job output directory (default OUT.logs)
#   --winnow PATH          winnow binary the tasks run (default: winnow on PATH)
#   --sbatch-arg ARG       extra sbatch argument for every job (repeatable),
#                          e.g. --sbatch-arg=--partition=cpu --sbatch-arg=--mem=4G
#
# Why --resubmit exists: when one array task fails, every later phase waits
# forever (its afterok dependency can never be met), and Slurm does not look
# at afterok again when the failed task is requeued. --resubmit submits a new
# array holding just the failed indices of the first phase that failed,
# cancels the later phases' waiting jobs and submits them again behind it.
# Rerunning a task is safe: winnow skips the units a task already finished.
#
# Task states come from scontrol while the controller still holds the job
# (until MinJobAge seconds after its end), else from sacct when the cluster
# keeps accounting. A task Slurm no longer knows about counts as failed for
# --resubmit, which only costs a rerun that finds its units done.
set -euo pipefail

here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
batch_script="$here/winnow.sbatch"

die() { echo "submit.sh: $*" >&2; exit 2; }

# Settings, read from the options or from a jobs file.
spec='' out='' winnow_bin=winnow logs='' tasks_default=4
sbatch_extra=()
# Per phase, in phase order.
phases=() phase_tasks=()
# Jobs, one entry per submitted array: parallel arrays.
job_phase=() job_id=() job_indices=()

# job PHASE JOBID INDICES: one line of a jobs file.
job() { job_phase+=("$1"); job_id+=("$2"); job_indices+=("$3"); }
# phase NAME TASKS: one line of a jobs file.
phase() { phases+=("$1"); phase_tasks+=("$2"); }

abspath() {
  case $1 in
    /*) printf '%s\n' "$1" ;;
    *) printf '%s/%s\n' "$PWD" "$1" ;;
  esac
}

# write_jobs FILE: the settings and every job so far, as a file `load_jobs` reads.
write_jobs() {
  local f=$1 tmp i
  tmp="$f.tmp.$$"
  {
    echo "# winnow jobs file written by configs/cluster/submit.sh; read by --status, --wait, --resubmit"
    printf 'spec=%q\nout=%q\nwinnow_bin=%q\nlogs=%q\n' "$spec" "$out" "$winnow_bin" "$logs"
    printf 'sbatch_extra=('
    for i in "${sbatch_extra[@]+"${sbatch_extra[@]}"}"; do printf ' %q' "$i"; done
    printf ' )\n'
    for i in "${!phases[@]}"; do printf 'phase %q %q\n' "${phases[$i]}" "${phase_tasks[$i]}"; done
    for i in "${!job_id[@]}"; do printf 'job %q %q %q\n' "${job_phase[$i]}" "${job_id[$i]}" "${job_indices[$i]}"; done
  } >"$tmp"
  mv "$tmp" "$f"
}

load_jobs() {
  [ -f "$1" ] || die "no jobs file $1"
  # shellcheck disable=SC1090
  . "$1"
  [ ${#phases[@]} -gt 0 ] || die "$1 lists no phases"
}

# submit_array PHASE TASKS INDICES DEPENDENCY: sbatch one array, print its id.
submit_array() {
  local phase=$1 n=$2 indices=$3 dep=$4 id
  local args=(--parsable --job-name="winnow-$phase" --array="$indices"
    --output="$logs/winnow-$phase-%A_%a.out")
  [ -z "$dep" ] || args+=(--dependency="afterok:$dep")
  id=$(WINNOW_SPEC="$spec" WINNOW_OUT="$out" WINNOW_PHASE="$phase" WINNOW_TASKS="$n" \
    WINNOW_BIN="$winnow_bin" sbatch "${args[@]}" "${sbatch_extra[@]+"${sbatch_extra[@]}"}" "$batch_script")
  id=${id%%;*}
  [ -n "$id" ] || die "sbatch gave no job id for phase $phase"
  printf '%s\n' "$id"
}

# expand_indices SPEC: Slurm array index list (0-3,7,9-13:2%4) to one per line.
expand_indices() {
  local list=${1%%\%*} part a b step
  list=${list#[}
  list=${list%]}
  local IFS=,
  for part in $list; do
    step=1
    case $part in *:*) step=${part#*:}; part=${part%%:*} ;; esac
    case $part in
      *-*) a=${part%-*}; b=${part#*-} ;;
      *) a=$part; b=$part ;;
    esac
    seq "$a" "$step" "$b"
  done
}

# task_states JOBID: "INDEX STATE" per array task Slurm knows of. The
# accounting database (sacct) goes first, the controller (scontrol) after:
# the controller knows a job at once and until MinJobAge after its end, the
# database later and for longer; phase_states keeps the last line per index.
task_states() {
  local id=$1 line jid st idx acct
  if acct=$(sacct -n -X -P -j "$id" -o JobID,State 2>/dev/null); then
    while IFS='|' read -r jid st; do
      [ -n "$jid" ] || continue
      idx=${jid#*_}
      [ "$idx" != "$jid" ] || continue
      st=${st%% *}
      expand_indices "$idx" | while read -r i; do echo "$i $st"; done
    done <<<"$acct"
  fi
  scontrol -o show job "$id" 2>/dev/null | while read -r line; do
    idx=$(printf '%s\n' "$line" | tr ' ' '\n' | sed -n 's/^ArrayTaskId=//p')
    st=$(printf '%s\n' "$line" | tr ' ' '\n' | sed -n 's/^JobState=//p')
    [ -n "$idx" ] && [ -n "$st" ] || continue
    expand_indices "$idx" | while read -r i; do echo "$i $st"; done
  done || true
}

# phase_states P: fills state[i] (latest job wins) and owner[i] (job id) for phase index P.
declare -a state owner
phase_states() {
  local p=$1 name=${phases[$1]} n=${phase_tasks[$1]} j i st
  state=() owner=()
  for ((i = 0; i < n; i++)); do state[i]=UNSUBMITTED; owner[i]=; done
  for j in "${!job_id[@]}"; do
    [ "${job_phase[$j]}" = "$name" ] || continue
    for i in $(expand_indices "${job_indices[$j]}"); do state[i]=UNKNOWN; owner[i]=${job_id[$j]}; done
    while read -r i st; do
      [ "${owner[i]:-}" = "${job_id[$j]}" ] && state[i]=$st
    done < <(task_states "${job_id[$j]}")
  done
}

is_failed() {
  case $1 in
    FAILED | CANCELLED* | TIMEOUT | NODE_FAIL | OUT_OF_MEMORY | BOOT_FAIL | DEADLINE | PREEMPTED | UNKNOWN | UNSUBMITTED) return 0 ;;
  esac
  return 1
}

# status: prints a line per phase; returns 3 while some task may still
# run, else 1 when a task failed, else 0. Tasks waiting behind a phase
# with a failed task never start, so they do not count as running.
status() {
  local p i ndone failed going blocked=0 any_failed=0 any_going=0 failed_list
  for p in "${!phases[@]}"; do
    phase_states "$p"
    ndone=0 failed=0 going=0 failed_list=''
    for i in "${!state[@]}"; do
      if [ "${state[i]}" = COMPLETED ]; then
        ndone=$((ndone + 1))
      elif is_failed "${state[i]}"; then
        failed=$((failed + 1))
        failed_list+="${failed_list:+,}$i"
      else
        going=$((going + 1))
      fi
    done
    printf '%s: %d/%d done' "${phases[$p]}" "$ndone" "${phase_tasks[$p]}"
    [ "$failed" -eq 0 ] || printf ', failed tasks %s' "$failed_list"
    if [ "$going" -gt 0 ] && [ "$blocked" -eq 1 ]; then
      printf ', %d waiting behind a failed phase (run --resubmit)' "$going"
    elif [ "$going" -gt 0 ]; then
      printf ', %d pending or running' "$going"
      any_going=1
    fi
    printf '\n'
    if [ "$failed" -gt 0 ]; then any_failed=1; blocked=1; fi
  done
  [ "$any_going" -eq 0 ] || return 3
  [ "$any_failed" -eq 0 ] || return 1
  return 0
}

resubmit() {
  local jobs_file=$1 p i prev='' changed=0 rerun going_ids id j
  for p in "${!phases[@]}"; do
    phase_states "$p"
    rerun='' going_ids=''
    if [ "$changed" -eq 1 ]; then
      # An earlier phase was resubmitted: this phase's waiting jobs can
      # never start. Cancel them and submit what is not done behind it.
      for j in "${!job_id[@]}"; do
        if [ "${job_phase[$j]}" = "${phases[$p]}" ]; then scancel "${job_id[$j]}" 2>/dev/null || true; fi
      done
      for i in "${!state[@]}"; do
        [ "${state[i]}" = COMPLETED ] || rerun+="${rerun:+,}$i"
      done
    else
      for i in "${!state[@]}"; do
        if [ "${state[i]}" = COMPLETED ]; then
          :
        elif is_failed "${state[i]}"; then
          rerun+="${rerun:+,}$i"
        else
          # Still pending or running: later phases wait for this very task.
          going_ids+="${going_ids:+:}${owner[i]}_$i"
        fi
      done
    fi
    if [ -n "$rerun" ]; then
      local dep=$prev
      [ -z "$going_ids" ] || dep="${dep:+$dep:}$going_ids"
      id=$(submit_array "${phases[$p]}" "${phase_tasks[$p]}" "$rerun" "$dep")
      job "${phases[$p]}" "$id" "$rerun"
      write_jobs "$jobs_file"
      echo "${phases[$p]} $id (tasks $rerun)"
      prev=$id
      [ -z "$going_ids" ] || prev="$prev:$going_ids"
      changed=1
    elif [ -n "$going_ids" ]; then
      prev=$going_ids
    fi
  done
  [ "$changed" -eq 1 ] || echo "nothing to resubmit" >&2
}

main() {
  local mode=submit jobs_file='' wait_secs=0 arg
  local -a overrides=()
  while [ $# -gt 0 ]; do
    arg=$1
    case $arg in
      --status | --wait | --resubmit)
        mode=${arg#--}
        jobs_file=${2:?$arg needs a jobs file}
        shift 2
        if [ "$mode" = wait ] && [ $# -gt 0 ]; then wait_secs=$1; shift; fi
        [ $# -eq 0 ] || die "unexpected arguments: $*"
        break
        ;;
      --tasks) tasks_default=${2:?}; shift 2 ;;
      --tasks=*) tasks_default=${arg#*=}; shift ;;
      --phase-tasks) overrides+=("${2:?}"); shift 2 ;;
      --phase-tasks=*) overrides+=("${arg#*=}"); shift ;;
      --jobs) jobs_file=${2:?}; shift 2 ;;
      --jobs=*) jobs_file=${arg#*=}; shift ;;
      --logs) logs=${2:?}; shift 2 ;;
      --logs=*) logs=${arg#*=}; shift ;;
      --winnow) winnow_bin=${2:?}; shift 2 ;;
      --winnow=*) winnow_bin=${arg#*=}; shift ;;
      --sbatch-arg) sbatch_extra+=("${2:?}"); shift 2 ;;
      --sbatch-arg=*) sbatch_extra+=("${arg#*=}"); shift ;;
      -h | --help) sed -n '2,/^set -euo/p' "${BASH_SOURCE[0]}" | sed '$d; s/^# \{0,1\}//'; exit 0 ;;
      --) shift; break ;;
      -*) die "unknown option $arg" ;;
      *) break ;;
    esac
  done

  case $mode in
    status) load_jobs "$jobs_file"; status; return ;;
    resubmit) load_jobs "$jobs_file"; resubmit "$jobs_file"; return ;;
    wait)
      load_jobs "$jobs_file"
      local start=$SECONDS rc
      while :; do
        rc=0
        status >/dev/null || rc=$?
        if [ "$rc" -ne 3 ]; then status || true; return "$rc"; fi
        if [ "$wait_secs" -gt 0 ] && [ $((SECONDS - start)) -ge "$wait_secs" ]; then
          status || true
          echo "submit.sh: still running after ${wait_secs}s" >&2
          return 3
        fi
        sleep 1
      done
      ;;
  esac

  [ $# -eq 2 ] || die "usage: submit.sh [options] SPEC OUT (see --help)"
  spec=$(abspath "$1")
  out=$(abspath "$2")
  [ -f "$spec" ] || die "no spec $spec"
  [[ $tasks_default =~ ^[1-9][0-9]*$ ]] || die "--tasks wants a whole number >= 1, got $tasks_default"
  jobs_file=${jobs_file:-${out%/}.jobs}
  logs=$(abspath "${logs:-${out%/}.logs}")
  [ ! -e "$jobs_file" ] || die "$jobs_file exists: use --status/--resubmit on it, or remove it"
  case $winnow_bin in */*) winnow_bin=$(abspath "$winnow_bin") ;; esac
  mkdir -p "$logs"

  local list name n o
  list=$("$winnow_bin" check "$spec" --phases) || die "winnow check $spec --phases failed"
  while IFS= read -r name; do
    [ -n "$name" ] || continue
    n=$tasks_default
    for o in "${overrides[@]+"${overrides[@]}"}"; do
      [ "${o%%=*}" = "$name" ] && n=${o#*=}
    done
    [[ $n =~ ^[1-9][0-9]*$ ]] || die "tasks for phase $name: want a whole number >= 1, got $n"
    phase "$name" "$n"
  done <<<"$list"
  [ ${#phases[@]} -gt 0 ] || die "winnow check $spec --phases printed no phases"
  for o in "${overrides[@]+"${overrides[@]}"}"; do
    local known=0
    for name in "${phases[@]}"; do [ "${o%%=*}" = "$name" ] && known=1; done
    [ "$known" -eq 1 ] || die "--phase-tasks $o: the spec has no phase ${o%%=*} (phases: ${phases[*]})"
  done

  local p prev='' id
  write_jobs "$jobs_file"
  for p in "${!phases[@]}"; do
    n=${phase_tasks[$p]}
    id=$(submit_array "${phases[$p]}" "$n" "0-$((n - 1))" "$prev")
    job "${phases[$p]}" "$id" "0-$((n - 1))"
    write_jobs "$jobs_file"
    echo "${phases[$p]} $id"
    prev=$id
  done
  echo "jobs recorded in $jobs_file; follow with: $0 --wait $jobs_file" >&2
}

main "$@"
