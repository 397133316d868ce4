/**
 * The commander `Command` every plumbline command is made of. One rule for all of them: an option
 * that takes one value may be given once. Commander keeps the last of repeated values without a word
 * (`--thickness 5nm --thickness 6nm` fitted 6 nm); here the second is refused, naming the option and
 * both values (exit 2, as any usage error). Options meant to repeat are variadic (`--device-tag
 * <tag...>`, given once with several values or several times) and collect every value; flags without
 * a value (`--json`) may be repeated, as that changes nothing.
 */
import { Command, type Option } from 'commander';

export class PlumblineCommand extends Command {
  /** The values given on this command line, as typed, by option (for the message). */
  private readonly given = new Map<string, string>();

  override createCommand(name?: string): Command {
    return new PlumblineCommand(name);
  }

  override addOption(option: Option): this {
    if ((option.required || option.optional) && !option.variadic) {
      const key = option.attributeName();
      // Added before commander's own listener (super.addOption), so it runs before the value is
      // stored: a value already from the command line is the earlier occurrence.
      this.on(`option:${option.name()}`, (value: string | undefined) => {
        if (this.getOptionValueSource(key) === 'cli') {
          const before = this.given.get(key);
          this.error(
            `error: option '${option.flags}' given twice (${before !== undefined ? `'${before}'` : 'without a value'}, then ${value !== undefined && value !== null ? `'${value}'` : 'without a value'}): it takes one value; give it once`,
            { exitCode: 2, code: 'plumbline.repeatedOption' },
          );
        }
        if (value !== undefined && value !== null) this.given.set(key, value);
      });
    }
    return super.addOption(option);
  }
}
