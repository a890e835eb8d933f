import { networkSchema, type Network, type NetworkInput } from '../../src/schema/index.js';

type Layer = NetworkInput['layers'][number];

/**
 * Layer lists of published networks, written the way a training framework exports them: explicit padding,
 * batch norm and activations as their own layers. Built from the papers' architecture tables so the
 * importer, the exporter and the cost walk can be checked against the papers' totals.
 */
type Act = 'relu' | 'relu6' | 'swish' | 'sigmoid';

class Builder {
  readonly layers: Layer[] = [];
  private n = 0;
  last = 'input';

  private push(layer: Layer & { id: string }): string {
    this.layers.push(layer);
    this.last = layer.id;
    return layer.id;
  }

  private name(prefix: string): string {
    return `${prefix}${++this.n}`;
  }

  /** Convolution with "same"-style explicit padding (k−1)/2, then batch norm and the activation. */
  conv(from: string, out: number, kernel: number, stride: number, act?: Act, opts: { groups?: number; bn?: boolean; bias?: boolean; pad?: number } = {}): string {
    const pad = opts.pad ?? (kernel - 1) / 2;
    let id = this.push({ id: this.name('conv'), ...(from === this.last ? {} : { input: from }), op: 'conv', out, kernel, stride, groups: opts.groups ?? 1, bias: opts.bias ?? false, padding: [pad, pad, pad, pad] });
    if (opts.bn ?? true) id = this.push({ id: this.name('bn'), op: 'batchnorm' });
    if (act) id = this.push({ id: this.name('act'), op: 'activation', fn: act });
    return id;
  }

  dw(from: string, kernel: number, stride: number, act: Act): string {
    const pad = (kernel - 1) / 2;
    this.push({ id: this.name('dw'), ...(from === this.last ? {} : { input: from }), op: 'dwconv', kernel, stride, bias: false, padding: [pad, pad, pad, pad] });
    this.push({ id: this.name('bn'), op: 'batchnorm' });
    return this.push({ id: this.name('act'), op: 'activation', fn: act });
  }

  op(layer: Layer, from?: string): string {
    const input = from === undefined || from === this.last ? {} : { input: from };
    return this.push({ id: this.name(layer.op), ...input, ...layer } as Layer & { id: string });
  }

  add(a: string, b: string): string {
    return this.push({ id: this.name('add'), op: 'add', inputs: [a, b] });
  }

  mul(a: string, b: string): string {
    return this.push({ id: this.name('mul'), op: 'mul', inputs: [a, b] });
  }

  concat(ids: string[]): string {
    return this.push({ id: this.name('cat'), op: 'concat', inputs: ids });
  }

  network(name: string, size: number): Network {
    return networkSchema.parse({ name, input: { channels: 3, height: size, width: size }, layers: this.layers });
  }
}

/** MobileNetV2 1.0-224 (Sandler et al., "MobileNetV2", CVPR 2018, Table 2: t, c, n, s). */
export function mobileNetV2(): Network {
  const b = new Builder();
  let x = b.conv('input', 32, 3, 2, 'relu6');
  let cin = 32;
  const rows: Array<[number, number, number, number]> = [
    [1, 16, 1, 1], [6, 24, 2, 2], [6, 32, 3, 2], [6, 64, 4, 2], [6, 96, 3, 1], [6, 160, 3, 2], [6, 320, 1, 1],
  ];
  for (const [t, c, n, s] of rows) {
    for (let i = 0; i < n; i++) {
      const stride = i === 0 ? s : 1;
      const blockIn = x;
      let y = t === 1 ? x : b.conv(x, cin * t, 1, 1, 'relu6');
      y = b.dw(y, 3, stride, 'relu6');
      y = b.conv(y, c, 1, 1); // linear bottleneck
      x = stride === 1 && cin === c ? b.add(blockIn, y) : y;
      cin = c;
    }
  }
  b.conv(x, 1280, 1, 1, 'relu6');
  b.op({ op: 'avgpool', global: true });
  b.op({ op: 'flatten' });
  b.op({ op: 'fc', out: 1000, bias: true });
  return b.network('MobileNetV2 1.0 224', 224);
}

/** ResNet-18 (He et al., "Deep Residual Learning", CVPR 2016, Table 1). */
export function resNet18(): Network {
  const b = new Builder();
  let x = b.conv('input', 64, 7, 2, 'relu');
  x = b.op({ op: 'maxpool', kernel: 3, stride: 2, padding: [1, 1, 1, 1] });
  let cin = 64;
  for (const [c, stride] of [[64, 1], [128, 2], [256, 2], [512, 2]] as const) {
    for (let i = 0; i < 2; i++) {
      const s = i === 0 ? stride : 1;
      const blockIn = x;
      let y = b.conv(x, c, 3, s, 'relu');
      y = b.conv(y, c, 3, 1);
      const shortcut = s !== 1 || cin !== c ? b.conv(blockIn, c, 1, s) : blockIn;
      b.add(y, shortcut);
      x = b.op({ op: 'activation', fn: 'relu' });
      cin = c;
    }
  }
  b.op({ op: 'avgpool', global: true });
  b.op({ op: 'flatten' });
  b.op({ op: 'fc', out: 1000, bias: true });
  return b.network('ResNet-18', 224);
}

/**
 * EfficientNet-B0 (Tan & Le, "EfficientNet", ICML 2019, Table 1): MBConv blocks with squeeze-and-excitation
 * of ratio 0.25 of the block's input channels (§4 and the reference implementation's convention), swish.
 */
export function efficientNetB0(): Network {
  const b = new Builder();
  let x = b.conv('input', 32, 3, 2, 'swish');
  let cin = 32;
  const rows: Array<[number, number, number, number, number]> = [
    // expansion, kernel, stride, channels, layers
    [1, 3, 1, 16, 1], [6, 3, 2, 24, 2], [6, 5, 2, 40, 2], [6, 3, 2, 80, 3], [6, 5, 1, 112, 3], [6, 5, 2, 192, 4], [6, 3, 1, 320, 1],
  ];
  for (const [t, k, s, c, n] of rows) {
    for (let i = 0; i < n; i++) {
      const stride = i === 0 ? s : 1;
      const blockIn = x;
      const mid = cin * t;
      let y = t === 1 ? x : b.conv(x, mid, 1, 1, 'swish');
      y = b.dw(y, k, stride, 'swish');
      const se = Math.max(1, Math.floor(cin * 0.25));
      b.op({ op: 'avgpool', global: true }, y);
      b.conv(b.last, se, 1, 1, 'swish', { bn: false, bias: true });
      const gate = b.conv(b.last, mid, 1, 1, 'sigmoid', { bn: false, bias: true });
      y = b.mul(y, gate);
      y = b.conv(y, c, 1, 1);
      x = stride === 1 && cin === c ? b.add(blockIn, y) : y;
      cin = c;
    }
  }
  b.conv(x, 1280, 1, 1, 'swish');
  b.op({ op: 'avgpool', global: true });
  b.op({ op: 'flatten' });
  b.op({ op: 'fc', out: 1000, bias: true });
  return b.network('EfficientNet-B0', 224);
}

/** SqueezeNet 1.0 (Iandola et al., "SqueezeNet", 2016, Table 1 and Fig. 2): valid padding, fire modules, biases. */
export function squeezeNet(): Network {
  const b = new Builder();
  b.conv('input', 96, 7, 2, 'relu', { bn: false, bias: true, pad: 0 });
  let x = b.op({ op: 'maxpool', kernel: 3, stride: 2, padding: 'valid', ceil: true });
  const fire = (from: string, s: number, e: number): string => {
    const sq = b.conv(from, s, 1, 1, 'relu', { bn: false, bias: true });
    const e1 = b.conv(sq, e, 1, 1, 'relu', { bn: false, bias: true });
    const e3 = b.conv(sq, e, 3, 1, 'relu', { bn: false, bias: true });
    return b.concat([e1, e3]);
  };
  x = fire(x, 16, 64);
  x = fire(x, 16, 64);
  x = fire(x, 32, 128);
  x = b.op({ op: 'maxpool', kernel: 3, stride: 2, padding: 'valid', ceil: true });
  x = fire(x, 32, 128);
  x = fire(x, 48, 192);
  x = fire(x, 48, 192);
  x = fire(x, 64, 256);
  x = b.op({ op: 'maxpool', kernel: 3, stride: 2, padding: 'valid', ceil: true });
  x = fire(x, 64, 256);
  b.conv(x, 1000, 1, 1, 'relu', { bn: false, bias: true });
  b.op({ op: 'avgpool', global: true });
  return b.network('SqueezeNet 1.0', 224);
}
