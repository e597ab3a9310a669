using RewriteProxy.Lanes;

namespace RewriteProxy.Tests.Lanes;

/// <summary>Concurrent identical misses share one call: its result, its failure and its cancellation alike.</summary>
public sealed class CoalescerTests
{
    static readonly TimeSpan Patience = TimeSpan.FromSeconds(10);

    [Fact]
    public async Task Callers_of_one_key_share_one_run_and_its_result()
    {
        var coalescer = new Coalescer<string>();
        var release = new TaskCompletionSource<string>(TaskCreationOptions.RunContinuationsAsynchronously);
        var runs = 0;
        Task<string> Work()
        {
            Interlocked.Increment(ref runs);
            return release.Task;
        }

        var first = coalescer.RunAsync("scope\nquestion", Work, out var firstJoined);
        var second = coalescer.RunAsync("scope\nquestion", Work, out var secondJoined);
        var other = coalescer.RunAsync("scope\nanother question", () => Task.FromResult("other"), out var otherJoined);
        release.SetResult("answer");

        Assert.Equal(["answer", "answer", "other"], await Task.WhenAll(first, second, other).WaitAsync(Patience));
        Assert.Equal(1, runs);
        Assert.Equal((false, true, false), (firstJoined, secondJoined, otherJoined));
    }

    [Fact]
    public async Task A_key_runs_afresh_once_its_call_has_ended()
    {
        var coalescer = new Coalescer<int>();
        var runs = 0;

        var first = await coalescer.RunAsync("k", () => Task.FromResult(Interlocked.Increment(ref runs)), out _);
        var second = await coalescer.RunAsync("k", () => Task.FromResult(Interlocked.Increment(ref runs)), out var joined);

        Assert.Equal((1, 2), (first, second));
        Assert.False(joined);
        Assert.Equal(0, coalescer.InFlight);
    }

    [Fact]
    public async Task A_failure_reaches_every_waiter_and_the_next_call_runs_again()
    {
        var coalescer = new Coalescer<string>();
        var release = new TaskCompletionSource<string>(TaskCreationOptions.RunContinuationsAsynchronously);
        var first = coalescer.RunAsync("k", () => release.Task, out _);
        var second = coalescer.RunAsync("k", () => Task.FromResult("not run"), out var joined);

        release.SetException(new HttpRequestException("upstream reset"));

        Assert.True(joined);
        var a = await Assert.ThrowsAsync<HttpRequestException>(() => first.WaitAsync(Patience));
        var b = await Assert.ThrowsAsync<HttpRequestException>(() => second.WaitAsync(Patience));
        Assert.Same(a, b);
        Assert.Equal(0, coalescer.InFlight);
        Assert.Equal("fresh", await coalescer.RunAsync("k", () => Task.FromResult("fresh"), out _));
    }

    [Fact]
    public async Task A_cancelled_call_is_cancelled_for_every_waiter()
    {
        var coalescer = new Coalescer<string>();
        var release = new TaskCompletionSource<string>(TaskCreationOptions.RunContinuationsAsynchronously);
        var first = coalescer.RunAsync("k", () => release.Task, out _);
        var second = coalescer.RunAsync("k", () => release.Task, out _);

        release.SetCanceled();

        await Assert.ThrowsAnyAsync<OperationCanceledException>(() => first.WaitAsync(Patience));
        await Assert.ThrowsAnyAsync<OperationCanceledException>(() => second.WaitAsync(Patience));
        Assert.Equal(0, coalescer.InFlight);
    }

    [Fact]
    public async Task A_waiter_that_gives_up_leaves_the_call_running_for_the_others()
    {
        // As LaneRouter waits: each caller with its own cancellation (the client leaving), the call shared.
        var coalescer = new Coalescer<string>();
        var release = new TaskCompletionSource<string>(TaskCreationOptions.RunContinuationsAsynchronously);
        using var leaving = new CancellationTokenSource();
        var leaver = coalescer.RunAsync("k", () => release.Task, out _).WaitAsync(leaving.Token);
        var stayer = coalescer.RunAsync("k", () => release.Task, out _);

        leaving.Cancel();
        await Assert.ThrowsAnyAsync<OperationCanceledException>(() => leaver);
        Assert.Equal(1, coalescer.InFlight);
        release.SetResult("answer");

        Assert.Equal("answer", await stayer.WaitAsync(Patience));
    }
}
