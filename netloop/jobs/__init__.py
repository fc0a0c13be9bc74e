"""The jobs: each composes the stages once (read, break, simulate, analyse, record); the CLI calls only these.

measure          one loop broken at one node: measure(netlist, at, ...) -> LoopResult
measure_pair     a fully differential pair, differential and common mode on one operating point
discover         loop groups of a netlist, and one measurement per group (check without --at)
compare          several break locations in one deck, side by side, differences explained (compare_explain)
corners          a corner plan (TOML) run as a regression on Dask, journalled line by line
statistics       Monte Carlo samples of a corner plan (one seed each): yields with Clopper-Pearson bounds, spreads
sensitivity      which values set a loop's margins (slopes per decade, ranked) and what value meets a requirement
runs             what corner runs' results files say: maps over numeric axes, requirement boundaries, a run against
                 its baseline, trends over several runs
loop_result      LoopResult, BreakInfo, SimInfo: the record every job returns
document         the JSON documents of those records (netloop.loop/1, netloop.corners/1), for output and journals
document_read    a loop document read back into its LoopResult (plots of corners from a results file)
"""
