#!/usr/bin/env bash
# Installs OrbitDesk's desktop entry, the *.orbitdesk MIME type and the icons
# for the current user (under ${XDG_DATA_HOME:-~/.local/share}); never needs root.
#
# Uses xdg-utils (xdg-desktop-menu, xdg-mime, xdg-icon-resource) when they are
# installed, otherwise copies the files into place and refreshes whichever
# caches it can (update-mime-database, update-desktop-database,
# gtk-update-icon-cache).
#
# Usage: install_desktop_files.sh [--exec PATH] [--copy] [--uninstall]
#   --exec PATH   launch PATH instead of the `orbitdesk` console script, e.g.
#                 the binary of a PyInstaller bundle (dist/orbitdesk/orbitdesk)
#   --copy        do not use xdg-utils even if they are installed
#   --uninstall   remove everything this script installs
#
# Works from a source checkout (packaging/ next to resources/) and from the
# share/ folder of a PyInstaller bundle (icons in share/icons/).
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
app_id="orbitdesk"
mime_type="application/x-orbitdesk-project"
mime_icon="application-x-orbitdesk-project"
sizes=(16 32 48 64 128 256 512)

exec_cmd=""
use_xdg=1
uninstall=0
while [[ $# -gt 0 ]]; do
    case "$1" in
        --exec) exec_cmd="${2:?--exec needs a path}"; shift 2 ;;
        --exec=*) exec_cmd="${1#--exec=}"; shift ;;
        --copy) use_xdg=0; shift ;;
        --uninstall) uninstall=1; shift ;;
        -h|--help) sed -n '2,18p' "${BASH_SOURCE[0]}" | sed 's/^# \{0,1\}//'; exit 0 ;;
        *) echo "unknown option: $1" >&2; exit 2 ;;
    esac
done

desktop_src="$here/$app_id.desktop"
mime_src="$here/$app_id-mime.xml"
if [[ -d "$here/../resources/icons" ]]; then
    icon_dir="$here/../resources/icons"; svg_src="$here/../resources/icon.svg"
else
    icon_dir="$here/icons"; svg_src="$here/icons/icon.svg"
    # Inside a bundle (…/orbitdesk/_internal/share) default to the bundle's binary.
    if [[ -z "$exec_cmd" && -x "$here/../../$app_id" && -f "$here/../../$app_id" ]]; then
        exec_cmd="$(cd "$here/../.." && pwd)/$app_id"
    fi
fi

data_home="${XDG_DATA_HOME:-$HOME/.local/share}"
apps_dir="$data_home/applications"
mime_dir="$data_home/mime"
hicolor="$data_home/icons/hicolor"

have() { command -v "$1" >/dev/null 2>&1; }
if [[ $use_xdg -eq 1 ]] && ! { have xdg-desktop-menu && have xdg-mime && have xdg-icon-resource; }; then
    use_xdg=0
fi

refresh_caches() {
    if have update-mime-database && [[ -d "$mime_dir" ]]; then
        update-mime-database "$mime_dir" >/dev/null 2>&1 || true
    fi
    if have update-desktop-database && [[ -d "$apps_dir" ]]; then
        update-desktop-database "$apps_dir" >/dev/null 2>&1 || true
    fi
    if have gtk-update-icon-cache && [[ -d "$hicolor" ]]; then
        gtk-update-icon-cache -f -t -q "$hicolor" >/dev/null 2>&1 || true
    fi
}

if [[ $uninstall -eq 1 ]]; then
    if [[ $use_xdg -eq 1 ]]; then
        xdg-desktop-menu uninstall --mode user "$app_id.desktop" || true
        xdg-mime uninstall --mode user "$mime_src" || true
    fi
    rm -f "$apps_dir/$app_id.desktop" "$mime_dir/packages/$app_id-mime.xml" \
          "$hicolor/scalable/apps/$app_id.svg" "$hicolor/scalable/mimetypes/$mime_icon.svg"
    for n in "${sizes[@]}"; do
        rm -f "$hicolor/${n}x${n}/apps/$app_id.png" "$hicolor/${n}x${n}/mimetypes/$mime_icon.png"
    done
    refresh_caches
    echo "OrbitDesk desktop files removed from $data_home"
    exit 0
fi

for f in "$desktop_src" "$mime_src" "$svg_src"; do
    [[ -f "$f" ]] || { echo "missing $f" >&2; exit 1; }
done

# The desktop entry, with Exec/TryExec pointed elsewhere if asked.
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
desktop="$tmp/$app_id.desktop"
if [[ -n "$exec_cmd" ]]; then
    quoted="$exec_cmd"
    [[ "$exec_cmd" == *" "* ]] && quoted="\"$exec_cmd\""
    sed -e "s|^Exec=$app_id |Exec=$quoted |" -e "s|^TryExec=.*|TryExec=$exec_cmd|" \
        "$desktop_src" > "$desktop"
else
    cp "$desktop_src" "$desktop"
fi

if [[ $use_xdg -eq 1 ]]; then
    echo "installing with xdg-utils into $data_home"
    for n in "${sizes[@]}"; do
        png="$icon_dir/$app_id-$n.png"
        [[ -f "$png" ]] || continue
        xdg-icon-resource install --noupdate --novendor --mode user --context apps --size "$n" "$png" "$app_id"
        xdg-icon-resource install --noupdate --novendor --mode user --context mimetypes --size "$n" "$png" "$mime_icon"
    done
    xdg-icon-resource forceupdate --mode user
    install -Dm644 "$svg_src" "$hicolor/scalable/apps/$app_id.svg"
    install -Dm644 "$svg_src" "$hicolor/scalable/mimetypes/$mime_icon.svg"
    xdg-mime install --mode user "$mime_src"
    xdg-desktop-menu install --mode user --novendor "$desktop"
    xdg-mime default "$app_id.desktop" "$mime_type" || true
else
    echo "installing by copying into $data_home"
    for n in "${sizes[@]}"; do
        png="$icon_dir/$app_id-$n.png"
        [[ -f "$png" ]] || continue
        install -Dm644 "$png" "$hicolor/${n}x${n}/apps/$app_id.png"
        install -Dm644 "$png" "$hicolor/${n}x${n}/mimetypes/$mime_icon.png"
    done
    install -Dm644 "$svg_src" "$hicolor/scalable/apps/$app_id.svg"
    install -Dm644 "$svg_src" "$hicolor/scalable/mimetypes/$mime_icon.svg"
    install -Dm644 "$mime_src" "$mime_dir/packages/$app_id-mime.xml"
    install -Dm644 "$desktop" "$apps_dir/$app_id.desktop"
fi
refresh_caches
echo "OrbitDesk: desktop entry, $mime_type (*.orbitdesk) and icons installed"
