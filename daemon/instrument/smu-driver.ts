/**
 * The SMU driver: a dialect plus a SCPI session give setCompliance, setVoltage, measure, outputOn,
 * outputOff. Order follows the safe-state recipe: compliance before output on; errors drained after
 * every configuration step; output off is attempted even when the session looks broken.
 */
import { fill, type Dialect } from '../../protocols/dialect.js';
import { parseReading, RejectCounter, type Reading } from '../../protocols/reading-parser.js';
import type { ScpiSession } from '../../protocols/scpi-session.js';

export interface Measurement {
  readonly reading: Reading | undefined;
  /** The raw reply, kept for the journal. */
  readonly raw: string;
  readonly compliance: boolean;
}

export class SmuDriver {
  readonly rejects = new RejectCounter();
  private outputKnownOn = false;

  constructor(readonly session: ScpiSession, readonly dialect: Dialect) {}

  async identify(): Promise<string> {
    return this.session.query(this.dialect.commands.identify);
  }

  /** Output off, function, compliance, integration, auto range — then the error queue must be empty. */
  async configure(settings: { compliance: number; nplc?: number }): Promise<void> {
    const c = this.dialect.commands;
    await this.session.write(c.outputOff);
    await this.session.write(c.sourceVoltageMode);
    await this.session.write(fill(c.compliance, settings.compliance));
    if (settings.nplc !== undefined) await this.session.write(fill(c.integration, settings.nplc));
    await this.session.write(c.autoRange);
    await this.session.checkErrors('configuring the instrument');
  }

  async setVoltage(v: number): Promise<void> {
    await this.session.write(fill(this.dialect.commands.sourceVoltage, v));
  }

  async outputOn(): Promise<void> {
    await this.session.write(this.dialect.commands.outputOn);
    await this.session.checkErrors('turning the output on');
    this.outputKnownOn = true;
  }

  /** Best effort: never throws; returns whether the command reached the transport. */
  async outputOff(): Promise<boolean> {
    try {
      await this.session.write(this.dialect.commands.outputOff);
      this.outputKnownOn = false;
      return true;
    } catch {
      return false;
    }
  }

  get outputOnAsFarAsKnown(): boolean {
    return this.outputKnownOn;
  }

  async measure(): Promise<Measurement> {
    const raw = await this.session.query(this.dialect.commands.measure);
    const parsed = parseReading(raw, this.dialect.readFields);
    const tripped = (await this.session.query(this.dialect.commands.complianceTripped)).trim() === '1';
    if (!parsed.ok) {
      this.rejects.add(parsed.reason);
      return { reading: undefined, raw, compliance: tripped };
    }
    return { reading: parsed.reading, raw, compliance: tripped };
  }
}
