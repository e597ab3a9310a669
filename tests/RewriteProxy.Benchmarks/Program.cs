// Temporary in the index branch: the embedding worker's Program.cs (the same line) replaces it on merge.
BenchmarkDotNet.Running.BenchmarkSwitcher.FromAssembly(typeof(RewriteProxy.Benchmarks.IndexLookupBenchmarks).Assembly).Run(args);
