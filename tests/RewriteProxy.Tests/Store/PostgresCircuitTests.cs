using RewriteProxy.Store.Postgres;

namespace RewriteProxy.Tests.Store;

/// <summary>The circuit breaker in front of the database, on a clock the test moves.</summary>
public sealed class PostgresCircuitTests
{
    long _now;

    PostgresCircuit NewCircuit() => new(() => _now);

    void Advance(TimeSpan by) => _now += (long)by.TotalMilliseconds;

    [Fact]
    public void A_closed_circuit_lets_every_call_through()
    {
        var circuit = NewCircuit();
        Assert.True(circuit.TryEnter());
        Assert.True(circuit.TryEnter());
        Assert.False(circuit.IsOpen);
    }

    [Fact]
    public void After_a_failure_calls_fail_fast_for_the_pause_then_one_call_tries()
    {
        var circuit = NewCircuit();
        circuit.Failed();

        Assert.False(circuit.TryEnter());
        Advance(PostgresCircuit.FirstPause - TimeSpan.FromMilliseconds(1));
        Assert.False(circuit.TryEnter());
        Advance(TimeSpan.FromMilliseconds(1));
        Assert.True(circuit.TryEnter());  // the one trial
        Assert.False(circuit.TryEnter()); // the others still fail fast while it runs
        circuit.Succeeded();
        Assert.True(circuit.TryEnter());
        Assert.True(circuit.TryEnter());
    }

    [Fact]
    public void The_pause_doubles_with_each_failed_try_up_to_the_longest()
    {
        var circuit = NewCircuit();
        var pause = PostgresCircuit.FirstPause;
        circuit.Failed();
        for (var i = 0; i < 6; i++)
        {
            Advance(pause - TimeSpan.FromMilliseconds(1));
            Assert.False(circuit.TryEnter());
            Advance(TimeSpan.FromMilliseconds(1));
            Assert.True(circuit.TryEnter());
            circuit.Failed();
            pause = TimeSpan.FromTicks(Math.Min(pause.Ticks * 2, PostgresCircuit.LongestPause.Ticks));
        }
        Assert.Equal(PostgresCircuit.LongestPause, pause);
    }

    [Fact]
    public void A_trial_abandoned_by_its_caller_lets_another_try()
    {
        var circuit = NewCircuit();
        circuit.Failed();
        Advance(PostgresCircuit.FirstPause);
        Assert.True(circuit.TryEnter());
        circuit.Abandoned();
        Assert.True(circuit.TryEnter());
    }
}
