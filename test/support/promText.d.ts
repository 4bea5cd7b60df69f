// Types of parse-prometheus-text-format (it ships none): the prom2json shape.
declare module 'parse-prometheus-text-format' {
  interface Sample {
    labels?: Record<string, string>;
    value: string;
  }
  interface Family {
    name: string;
    help: string;
    type: 'COUNTER' | 'GAUGE' | 'HISTOGRAM' | 'SUMMARY' | 'UNTYPED';
    metrics: Sample[];
  }
  export default function parsePrometheusTextFormat(text: string): Family[];
}
