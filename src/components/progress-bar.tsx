import type { JobProgress } from '../../shared/jobs';

// Progress of work a worker does (a result, an adjustment run, a certificate), from its durable progress row.
// A labelled bar: the stage in words and the percentage beside it, exposed as an ARIA progressbar with the same
// text, so the state never rests on the bar's colour or length alone.

export function ProgressBar({ label, progress }: { label: string; progress: Pick<JobProgress, 'state' | 'stage' | 'fraction' | 'error'> }) {
  const percent = Math.round(Math.min(1, Math.max(0, progress.fraction)) * 100);
  const failed = progress.state === 'failed';
  const waiting = progress.state === 'queued';
  const text = failed ? `${progress.stage}: ${progress.error ?? 'no reason given'}` : `${progress.stage}, ${percent} %`;
  return (
    <div className="space-y-1" data-testid="job-progress">
      <div className="flex items-baseline justify-between gap-3 text-sm">
        <span className="font-medium text-ink-800">{label}</span>
        <span className="tabular-nums text-ink-600" aria-hidden="true">{failed ? 'failed' : `${percent} %`}</span>
      </div>
      <div role="progressbar" aria-label={label} aria-valuemin={0} aria-valuemax={100} aria-valuenow={percent} aria-valuetext={text}
        className="relative h-3 overflow-hidden rounded-sm border border-ink-300 bg-paper-100">
        <div className={`h-full transition-[width] duration-500 ${failed ? 'bg-disagree-600' : 'bg-brass-500'} ${waiting ? 'animate-pulse' : ''}`}
          style={{ width: `${failed ? 100 : Math.max(percent, 2)}%`, backgroundImage: failed ? undefined : 'repeating-linear-gradient(135deg, transparent 0 6px, rgba(255,255,255,0.18) 6px 12px)' }} />
      </div>
      <p className={`text-xs ${failed ? 'text-disagree-800' : 'text-ink-500'}`} aria-live="polite">{failed ? text : `Stage: ${progress.stage}`}</p>
    </div>
  );
}
