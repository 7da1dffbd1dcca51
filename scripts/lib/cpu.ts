import { execFileSync } from 'node:child_process'
import { readdirSync, readFileSync } from 'node:fs'

// CPU time of the processes a benchmark involves, read from /proc (Linux): the app server,
// this benchmark process, PostgreSQL's processes and everything else. A rate is only half of
// a benchmark's story on a machine whose cores are shared by all of them. A process that
// ends between two readings is not counted.

const clockTicks = Number(execFileSync('getconf', ['CLK_TCK'], { encoding: 'utf8' }).trim()) || 100

export type CpuSeconds = Record<'server' | 'bench' | 'postgres' | 'store' | 'other', number>

export type CpuByProcess = Map<number, { group: keyof CpuSeconds, seconds: number }>

/**
 * Each process's CPU time so far, with its group. `storePid`: the object-store fake's process
 * when it runs apart (else counted as bench).
 */
export function cpuByProcess(serverPid: number, storePid?: number): CpuByProcess {
  const out: CpuByProcess = new Map()
  for (const entry of readdirSync('/proc')) {
    if (!/^\d+$/.test(entry)) continue
    let stat: string
    try { stat = readFileSync(`/proc/${entry}/stat`, 'utf8') }
    catch { continue } // ended meanwhile
    // proc(5): the command sits in parentheses; utime and stime are fields 14 and 15.
    const comm = stat.slice(stat.indexOf('(') + 1, stat.lastIndexOf(')'))
    const fields = stat.slice(stat.lastIndexOf(')') + 2).split(' ')
    const seconds = (Number(fields[11]) + Number(fields[12])) / clockTicks
    const pid = Number(entry)
    out.set(pid, { group: pid === serverPid ? 'server' : pid === process.pid ? 'bench' : pid === storePid ? 'store' : comm === 'postgres' ? 'postgres' : 'other', seconds })
  }
  return out
}

/**
 * CPU spent per group between two readings, process by process: one that ended in between is
 * left out (subtracting its whole life's CPU from the group would make it negative), one that
 * started counts from zero.
 */
export function cpuSpent(before: CpuByProcess, after: CpuByProcess): CpuSeconds {
  const out: CpuSeconds = { server: 0, bench: 0, postgres: 0, store: 0, other: 0 }
  for (const [pid, p] of after) out[p.group] += p.seconds - (before.get(pid)?.seconds ?? 0)
  return out
}

/**
 * Each group's share of one core between two readings, in per cent, process by process as
 * cpuSpent counts. (Differences of the groups' totals let "other" go negative when one of its
 * processes, a build of another session, ended between the readings.)
 */
export function cpuShares(before: CpuByProcess, after: CpuByProcess, seconds: number): Record<keyof CpuSeconds, number> {
  const spent = cpuSpent(before, after)
  const share = (k: keyof CpuSeconds) => Math.round(spent[k] / seconds * 100)
  return { server: share('server'), bench: share('bench'), postgres: share('postgres'), store: share('store'), other: share('other') }
}
