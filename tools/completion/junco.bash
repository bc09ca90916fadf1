# bash completion for junco, installed as share/bash-completion/completions/junco
# (bash-completion loads it on first use; or `source` it by hand).
#
# Commands, calculators, plot kinds and options are read from the installed
# junco's own --help when TAB is pressed (the first answer per command is
# cached for the shell's life), so a new subcommand or option completes
# without touching this file. Only option values are listed here.
# shellcheck disable=SC2207  # COMPREPLY=($(compgen ...)): the usual idiom; words have no spaces

_junco_help() {
  # Help text of "junco ARGS --help", cached per ARGS.
  local key="${*// /_}"
  key="${key//[^A-Za-z0-9_]/_}"
  local var="_junco_help_cache_${key}"
  if [[ -z "${!var+set}" ]]; then
    printf -v "$var" '%s' "$("${_junco_cmd:-junco}" "$@" --help 2>/dev/null)"
  fi
  printf '%s\n' "${!var}"
}

_junco_commands() {
  # The lines "  NAME  summary" after "commands:" in `junco --help`.
  _junco_help | awk '/^commands:/ { on = 1; next } on && /^  [a-z]/ { print $1 }'
}

_junco_subcommands() {
  # design: the calculators listed under "calculators"; lab: its "lab commands";
  # plot: the kinds in its usage lines.
  case "$1" in
    design) _junco_help design | awk '/^calculators/ { on = 1; next } on && /^  [a-z]/ { print $1 } /^$/ { on = 0 }' ;;
    lab) _junco_help lab | awk '/^lab commands/ { on = 1; next } on && /^  [a-z]/ { print $1 } /^$/ { on = 0 }' ;;
    plot) _junco_help plot | sed -n 's/^\(usage:\)\{0,1\} *junco plot \([a-z]*\) .*/\2/p' ;;
    export) printf '%s\n' spice json touchstone stats ;;
  esac
}

_junco_options() {
  _junco_help "$@" | grep -oE -- '--[a-z][a-z0-9-]*' | sort -u
}

_junco() {
  local cur="${COMP_WORDS[COMP_CWORD]}" prev="${COMP_WORDS[COMP_CWORD-1]}"
  local _junco_cmd="${COMP_WORDS[0]}"
  COMPREPLY=()
  if ((COMP_CWORD == 1)); then
    COMPREPLY=($(compgen -W "$(_junco_commands) --help --version" -- "$cur"))
    return
  fi
  local cmd="${COMP_WORDS[1]}" sub=""
  case "$cmd" in
    design | plot | lab)
      if ((COMP_CWORD == 2)); then
        COMPREPLY=($(compgen -W "$(_junco_subcommands "$cmd") --help" -- "$cur"))
        return
      fi
      sub="${COMP_WORDS[2]}"
      ;;
  esac

  # Values of options.
  case "$prev" in
    --out | --model | --model-out | --readings | --ac | --config)
      COMPREPLY=($(compgen -f -- "$cur")); compopt -o filenames 2>/dev/null; return ;;
    --dir) COMPREPLY=($(compgen -d -- "$cur")); compopt -o filenames 2>/dev/null; return ;;
    --socket) COMPREPLY=($(compgen -f -- "$cur")); compopt -o filenames 2>/dev/null; return ;;
    --state) COMPREPLY=($(compgen -W "queued running paused done failed cancelled interrupted" -- "$cur")); return ;;
    --export)
      if [[ "$cmd" == lots ]]; then COMPREPLY=($(compgen -W "spice json" -- "$cur"))
      else COMPREPLY=($(compgen -W "json spice csv iv-csv ac-csv off-csv" -- "$cur")); fi
      return ;;
    --robust) COMPREPLY=($(compgen -W "huber cauchy" -- "$cur")); return ;;
    --ac-unit) COMPREPLY=($(compgen -W "vrms vpp" -- "$cur")); return ;;
    --switch) COMPREPLY=($(compgen -W "series shunt" -- "$cur")); return ;;
  esac

  if [[ "$cur" == -* ]]; then
    COMPREPLY=($(compgen -W "$(_junco_options "$cmd" ${sub:+"$sub"}) --help" -- "$cur"))
    return
  fi
  # Positional arguments that are files.
  case "$cmd" in
    fit | submit | export | plot)
      if [[ "$cmd" == export ]] && ((COMP_CWORD == 2)); then
        COMPREPLY=($(compgen -W "$(_junco_subcommands export)" -- "$cur"))
      else
        COMPREPLY=($(compgen -f -- "$cur")); compopt -o filenames 2>/dev/null
      fi
      ;;
  esac
}
complete -F _junco junco
